namespace FiberWorkers.Cluster.Workers;

/// <summary>
/// A least-recently-used cache of values computed once per key (concurrent requests for a key share one
/// computation; a failed computation is forgotten so the next request tries again). Thread-safe.
/// </summary>
public sealed class BoundedCache<TKey, TValue>
    where TKey : notnull
{
    private readonly Lock _gate = new();
    private readonly int _capacity;
    private readonly Dictionary<TKey, LinkedListNode<(TKey Key, Lazy<Task<TValue>> Value)>> _map = [];
    private readonly LinkedList<(TKey Key, Lazy<Task<TValue>> Value)> _order = new();

    public BoundedCache(int capacity)
    {
        ArgumentOutOfRangeException.ThrowIfLessThan(capacity, 1);
        _capacity = capacity;
    }

    public int Count
    {
        get
        {
            lock (_gate)
            {
                return _map.Count;
            }
        }
    }

    public async Task<TValue> GetAsync(TKey key, Func<TKey, Task<TValue>> create)
    {
        ArgumentNullException.ThrowIfNull(create);
        Lazy<Task<TValue>> entry;
        lock (_gate)
        {
            if (_map.TryGetValue(key, out var node))
            {
                _order.Remove(node);
                _order.AddFirst(node);
                entry = node.Value.Value;
            }
            else
            {
                entry = new Lazy<Task<TValue>>(() => create(key));
                _map[key] = _order.AddFirst((key, entry));
                while (_map.Count > _capacity)
                {
                    var last = _order.Last!;
                    _order.RemoveLast();
                    _map.Remove(last.Value.Key);
                }
            }
        }

        try
        {
            return await entry.Value.ConfigureAwait(false);
        }
        catch
        {
            lock (_gate)
            {
                if (_map.TryGetValue(key, out var node) && ReferenceEquals(node.Value.Value, entry))
                {
                    _order.Remove(node);
                    _map.Remove(key);
                }
            }

            throw;
        }
    }
}
