namespace FiberWorkers.Fuzz.Tests;
