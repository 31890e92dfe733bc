using BenchmarkDotNet.Running;

// Run all: dotnet run -c Release --project tests/FiberWorkers.Benchmarks -- --filter '*'
// One class: ... -- --filter '*EvaluationBenchmarks*'
BenchmarkSwitcher.FromAssembly(typeof(Program).Assembly).Run(args);
