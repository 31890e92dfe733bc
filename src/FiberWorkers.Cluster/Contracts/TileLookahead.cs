namespace FiberWorkers.Cluster.Contracts;

/// <summary>
/// Tiles a worker takes beyond its tile threads: they wait at the worker for a thread, so the next tile is already
/// there when one finishes and no thread idles for the round trip to the coordinator (3.4 ms a tile on the three-bus
/// benchmark, 4 % of its tile time). Both sides use the same number: the coordinator sends a worker at most
/// threads + this many tiles, and a worker refuses more with ResourceExhausted. One: a deeper queue would keep
/// more tiles waiting behind a slow one at the end of a sweep while other workers idle.
/// </summary>
public static class TileLookahead
{
    /// <summary>Tiles waiting at a worker for a free tile thread, at most.</summary>
    public const int Depth = 1;
}
