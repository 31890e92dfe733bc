using FiberWorkers.Fuzz.Tests.Engine;
using Xunit.Abstractions;

namespace FiberWorkers.Fuzz.Tests.StartFibers;

/// <summary>Fuzzing the start-fiber file reader with mutants of files it wrote itself.</summary>
[Collection(FuzzCollection.Name)]
public sealed class StartFiberFuzzTests(ITestOutputHelper output)
{
    [Fact]
    public void Mutated_start_fiber_files_load_and_round_trip_or_fail_with_a_located_input_error()
    {
        var target = new FuzzTarget("start-fiber", StartFiberInputs.Mutant, StartFiberProperty.Check, ".start-fiber.json");

        var report = new FuzzRunner(FuzzSettings.Current).Run(target, FuzzSettings.Current.Share(0.1));

        output.WriteLine(report.ToString());
        FuzzAssert.NoFindings(report);
        FuzzAssert.Reached(report, "valid", "invalid: JSON");
    }
}
