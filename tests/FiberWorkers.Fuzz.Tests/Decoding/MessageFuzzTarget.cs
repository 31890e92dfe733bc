using FiberWorkers.Algebra.Families;
using Google.Protobuf;
using Grpc.Core;

namespace FiberWorkers.Fuzz.Tests.Decoding;

/// <summary>
/// A message a server decodes from the wire: its parser, valid sample encodings to mutate, and the validator the
/// service runs on it after decoding (null until one exists). A validator may reject a decoded message only with an
/// <see cref="InputException"/> or an <see cref="RpcException"/> whose status is one of <see cref="RejectionCodes"/>;
/// any other exception escaping it is a finding.
/// </summary>
/// <param name="Name">The message name, e.g. <c>SubmitSweepRequest</c>.</param>
/// <param name="Parser">The generated parser (what gRPC's marshaller calls).</param>
/// <param name="Samples">Valid messages; their encodings seed the mutations.</param>
/// <param name="Validate">The service's request validator, applied to every message that decodes.</param>
internal sealed record MessageFuzzTarget(string Name, MessageParser Parser, IReadOnlyList<IMessage> Samples, Action<IMessage>? Validate = null)
{
    /// <summary>The status codes a validator may reject a request with.</summary>
    public static readonly StatusCode[] RejectionCodes =
        [StatusCode.InvalidArgument, StatusCode.OutOfRange, StatusCode.ResourceExhausted, StatusCode.FailedPrecondition];

    /// <summary>True for the ways a validator is allowed to say no.</summary>
    public static bool IsRejection(Exception error) =>
        error is InputException || (error is RpcException rpc && Array.IndexOf(RejectionCodes, rpc.StatusCode) >= 0);

    public override string ToString() => Name;
}
