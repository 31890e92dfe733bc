using System.Globalization;
using FiberWorkers.Algebra.Families;
using FiberWorkers.Cli.Output;
using FiberWorkers.Cluster.Client;
using FiberWorkers.Cluster.Security;
using FiberWorkers.Contracts.V1;
using Grpc.Core;

namespace FiberWorkers.Cli.Commands;

/// <summary><c>fiber ask --coordinator URL --atlas ID --at P=..</c>: one point answered by the cluster.</summary>
internal static class ClusterAsk
{
    public static async Task<int> RunAsync(
        Uri coordinator, ClientSecurity security, string atlasId, int version, string at, bool verify, bool direct, bool json, TextWriter output, CancellationToken cancellation)
    {
        using var client = new ClusterClient(coordinator, security: security);
        var versions = await client.VersionsAsync(atlasId, cancellation).ConfigureAwait(false);
        if (versions.Count == 0)
        {
            throw new RpcException(new Status(StatusCode.NotFound, $"atlas '{atlasId}' has no committed version"));
        }

        var family = FamilyReader.Parse(versions[^1].FamilyJson, $"atlas {atlasId} (family)");
        var point = ParameterPoint.Parse(at, family);
        var request = new AskRequest { AtlasId = atlasId, Version = version, RequestId = Guid.NewGuid().ToString("N"), Verify = verify };
        request.Point.Add(point);
        var reply = direct ? await client.AskDirectAsync(request, cancellation).ConfigureAwait(false) : await client.AskAsync(request, cancellation).ConfigureAwait(false);
        if (json)
        {
            JsonOutput.Write(output, writer =>
            {
                writer.WriteStartObject();
                writer.WriteStartObject("parameters");
                for (var k = 0; k < point.Length; k++)
                {
                    writer.WriteNumber(family.Parameters[k].Name, point[k]);
                }

                writer.WriteEndObject();
                writer.WriteNumber("realCount", reply.RealCount);
                writer.WriteString("method", reply.Method);
                writer.WriteBoolean("certified", reply.Certified);
                writer.WriteNumber("atlasVersion", reply.AtlasVersion);
                writer.WriteNumber("predictedLabel", reply.PredictedLabel);
                writer.WriteBoolean("outsideBox", reply.OutsideBox);
                if (reply.StartSample.Length > 0)
                {
                    writer.WriteString("startSample", reply.StartSample);
                }

                if (reply.HasVerified)
                {
                    writer.WriteBoolean("verified", reply.Verified);
                }

                writer.WriteStartArray("rejections");
                foreach (var rejection in reply.Rejections)
                {
                    writer.WriteStringValue(rejection);
                }

                writer.WriteEndArray();
                writer.WriteStartArray("solutions");
                foreach (var solution in reply.Solutions)
                {
                    writer.WriteStartObject();
                    writer.WriteStartObject("values");
                    for (var i = 0; i < family.Unknowns.Count && i < solution.Values.Count; i++)
                    {
                        writer.WriteNumber(family.Unknowns[i], solution.Values[i]);
                    }

                    writer.WriteEndObject();
                    writer.WriteBoolean("certified", solution.Certified);
                    writer.WriteEndObject();
                }

                writer.WriteEndArray();
                writer.WriteString("workerId", reply.WorkerId);
                writer.WriteString("tileKey", reply.TileKey);
                writer.WriteEndObject();
            });
        }
        else
        {
            output.WriteLine($"at          {ParameterPoint.Format(family, point)}{(reply.OutsideBox ? "  (outside the atlas box: solved in full)" : string.Empty)}");
            output.WriteLine($"method      {reply.Method}{(reply.StartSample.Length > 0 ? $" from the {reply.StartSample}" : string.Empty)}, by worker {reply.WorkerId} (tile {reply.TileKey})");
            output.WriteLine($"real count  {reply.RealCount} ({(reply.Certified ? "certified" : "not certified")}; atlas version {reply.AtlasVersion}, predicted label {reply.PredictedLabel})");
            if (reply.HasVerified)
            {
                output.WriteLine($"verified    {(reply.Verified ? "the full solve agrees" : "the full solve DISAGREES")}");
            }

            if (reply.Solutions.Count > 0)
            {
                output.WriteLine();
                output.WriteLine($"  #  {string.Join("  ", family.Unknowns.Select(u => $"{u,14}"))}  certified");
                for (var r = 0; r < reply.Solutions.Count; r++)
                {
                    var row = string.Join("  ", reply.Solutions[r].Values.Select(v => string.Create(CultureInfo.InvariantCulture, $"{v,14:G10}")));
                    output.WriteLine(string.Create(CultureInfo.InvariantCulture, $"{r + 1,3}  {row}  {(reply.Solutions[r].Certified ? "yes" : "no")}"));
                }
            }

            output.WriteLine(FiberOutput.Caution);
        }

        return CommandLine.Success;
    }
}
