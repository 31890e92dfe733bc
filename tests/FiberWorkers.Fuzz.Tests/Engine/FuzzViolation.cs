namespace FiberWorkers.Fuzz.Tests.Engine;

/// <summary>Thrown by a fuzz check when an outcome is of an allowed kind but breaks the property (for example an input error without a location).</summary>
internal sealed class FuzzViolation(string message) : Exception(message);
