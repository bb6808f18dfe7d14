namespace Strayspot.Scoring.Evaluation;

/// <summary>
/// 8-connected component labelling, two passes with union–find. Minimal and private to evaluation for now;
/// to be consolidated with scoring/Regions/RegionFinder once that lands. Buffers are owned and reused across frames.
/// </summary>
internal sealed class ComponentLabeller
{
    private int[] _parent = new int[256];
    private int[] _compact = new int[256];

    /// <summary>Writes ids 1..count (0 = not in <paramref name="value"/>) into <paramref name="labels"/> and returns count.</summary>
    public int Label(ReadOnlySpan<byte> mask, byte value, int width, int height, Span<int> labels)
    {
        int next = 1;
        for (int y = 0; y < height; y++)
        {
            int row = y * width;
            for (int x = 0; x < width; x++)
            {
                int i = row + x;
                if (mask[i] != value) { labels[i] = 0; continue; }
                // Already-visited neighbours: west, north-west, north, north-east.
                int l = 0;
                if (x > 0) l = Join(l, labels[i - 1]);
                if (y > 0)
                {
                    int up = i - width;
                    if (x > 0) l = Join(l, labels[up - 1]);
                    l = Join(l, labels[up]);
                    if (x + 1 < width) l = Join(l, labels[up + 1]);
                }
                if (l == 0)
                {
                    if (next == _parent.Length) Array.Resize(ref _parent, _parent.Length * 2);
                    _parent[next] = next;
                    l = next++;
                }
                labels[i] = l;
            }
        }
        if (_compact.Length < next) _compact = new int[_parent.Length];
        int count = 0;
        for (int k = 1; k < next; k++)
        {
            int root = Find(k);
            _compact[k] = root == k ? ++count : _compact[root]; // a root is always below its members
        }
        for (int i = 0; i < labels.Length; i++)
            if (labels[i] != 0) labels[i] = _compact[labels[i]];
        return count;
    }

    private int Join(int current, int neighbour)
    {
        if (neighbour == 0) return current;
        if (current == 0) return neighbour;
        int a = Find(current), b = Find(neighbour);
        if (a == b) return a;
        // The smaller id becomes the root, so roots precede members in the compaction pass.
        if (a < b) { _parent[b] = a; return a; }
        _parent[a] = b;
        return b;
    }

    private int Find(int k)
    {
        int root = k;
        while (_parent[root] != root) root = _parent[root];
        while (_parent[k] != root)
        {
            int up = _parent[k];
            _parent[k] = root;
            k = up;
        }
        return root;
    }
}
