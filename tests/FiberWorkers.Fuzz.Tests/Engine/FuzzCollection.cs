namespace FiberWorkers.Fuzz.Tests.Engine;

/// <summary>The fuzz tests run one after another: each is time-bounded, and the machine has two cores.</summary>
[CollectionDefinition(Name, DisableParallelization = true)]
public sealed class FuzzCollection
{
    public const string Name = "fuzz";
}
