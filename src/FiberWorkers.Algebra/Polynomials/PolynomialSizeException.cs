namespace FiberWorkers.Algebra.Polynomials;

/// <summary>Raised when polynomial arithmetic would exceed a term or degree limit.</summary>
public sealed class PolynomialSizeException(string message) : Exception(message);
