using FiberWorkers.Fuzz.Tests.Engine;
using Xunit.Abstractions;

namespace FiberWorkers.Fuzz.Tests.Families;

/// <summary>
/// Fuzzing the family reader (JSON shape, proto3 JSON, validation, expression parser, polynomial builder) and what
/// a valid family feeds: the compiler and the evaluator. See <see cref="FamilyProperty"/> for the property.
/// </summary>
[Collection(FuzzCollection.Name)]
public sealed class FamilyFuzzTests(ITestOutputHelper output)
{
    [Fact]
    public void Mutated_family_files_read_to_a_valid_family_or_to_a_located_input_error()
    {
        var target = new FuzzTarget("family-mutants", FamilyInputs.Mutant, FamilyProperty.Check, ".family.json");

        var report = new FuzzRunner(FuzzSettings.Current).Run(target, FuzzSettings.Current.Share(0.35));

        output.WriteLine(report.ToString());
        FuzzAssert.NoFindings(report);
        FuzzAssert.Reached(report, "valid", "invalid: JSON", "invalid: equation text", "invalid: UTF-8");
    }

    [Fact]
    public void Families_with_generated_equations_read_compile_and_evaluate_or_fail_at_a_column()
    {
        var target = new FuzzTarget("family-equations", FamilyInputs.Generated, FamilyProperty.Check, ".family.json");

        var report = new FuzzRunner(FuzzSettings.Current).Run(target, FuzzSettings.Current.Share(0.2));

        output.WriteLine(report.ToString());
        FuzzAssert.NoFindings(report);
        FuzzAssert.Reached(report, "valid", "invalid: equation text");
    }
}
