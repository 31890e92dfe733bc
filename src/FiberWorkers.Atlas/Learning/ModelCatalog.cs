using System.Security.Cryptography;
using System.Text;
using FiberWorkers.Atlas.Stores;
using FiberWorkers.Contracts.V1;
using Google.Protobuf;

namespace FiberWorkers.Atlas.Learning;

/// <summary>
/// Trained models live inside the atlas: each is a new version (kind <c>model</c>) that shares every tile with the
/// version it was trained on and carries the encoded <see cref="ClassifierModel"/> as a blob.
/// </summary>
public static class ModelCatalog
{
    /// <summary>Stores a model as a new version derived from the snapshot it was trained on; returns the version.</summary>
    public static int Save(IAtlasStore store, AtlasSnapshot trainedOn, ClassifierModel model, string description)
    {
        ArgumentNullException.ThrowIfNull(store);
        ArgumentNullException.ThrowIfNull(trainedOn);
        ArgumentNullException.ThrowIfNull(model);
        var bytes = model.ToByteArray();
        var modelHash = Convert.ToHexStringLower(SHA256.HashData(bytes));
        return store.CommitDerived(
            trainedOn.AtlasId,
            trainedOn.Version.Version,
            "model",
            $"model:{model.Kind};{description}",
            [],
            ($"model/{trainedOn.AtlasId}/{{version}}", bytes),
            _ => (Convert.ToHexStringLower(SHA256.HashData(Encoding.UTF8.GetBytes($"{trainedOn.Version.ContentHash}\nmodel {modelHash}"))), trainedOn.Version.Summary));
    }

    /// <summary>The newest stored model of a kind (<c>net</c> or <c>knn</c>), or null.</summary>
    public static (int Version, ClassifierModel Model)? Latest(IAtlasStore store, string atlasId, string kind, string source)
    {
        ArgumentNullException.ThrowIfNull(store);
        foreach (var version in store.Versions(atlasId).Reverse())
        {
            if (version.Kind != "model" || !version.Options.StartsWith($"model:{kind};", StringComparison.Ordinal))
            {
                continue;
            }

            var bytes = store.GetBlob($"model/{atlasId}/{version.Version}")
                ?? throw new Algebra.Families.InputException(source, $"version {version.Version}", "the model is missing from the atlas file (the file is damaged)");
            try
            {
                return (version.Version, ClassifierModel.Parser.ParseFrom(bytes));
            }
            catch (InvalidProtocolBufferException e)
            {
                throw new Algebra.Families.InputException(source, $"version {version.Version}", $"the model cannot be decoded ({e.Message})");
            }
        }

        return null;
    }
}
