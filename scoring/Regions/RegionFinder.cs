using System.Runtime.CompilerServices;
using System.Numerics.Tensors;
using Strayspot.Scoring.Boundaries;
using Strayspot.Scoring.Logits;

namespace Strayspot.Scoring.Regions;

/// <summary>
/// Finds the 8-connected components of an anomaly mask and turns those that pass a <see cref="RegionFilter"/>
/// into <see cref="Region"/>s. Works on horizontal runs of mask pixels (empty stretches are skipped with span
/// searches), joined with union-find to the touching runs of the row above. Buffers are owned by the instance
/// and reused; one instance is not for concurrent use.
/// </summary>
public sealed class RegionFinder
{
    private int[] _runRow = new int[256], _runStart = new int[256], _runEnd = new int[256], _parent = new int[256];
    private int[] _componentOfRun = [], _runOrder = [], _componentFirst = [], _regionIdOfComponent = [];
    private long[] _area = [];
    private int[] _classCounts = [], _touchedClasses = [];
    private bool[] _isSurface = [];
    private int[] _labels = [];
    private int _runCount, _width, _height;
    private long _generation;
    private bool _labelsFilled;

    public RegionSet Find(ReadOnlySpan<byte> mask, int width, int height, ReadOnlySpan<float> score,
        ReadOnlySpan<ushort> classIndex, int classCount, RegionFilter filter)
    {
        ArgumentNullException.ThrowIfNull(filter);
        FrameBands.CheckSize(width, height, mask.Length, "mask");
        FrameBands.CheckSize(width, height, score.Length, "score map");
        FrameBands.CheckSize(width, height, classIndex.Length, "class map");
        if (classCount is < 1 or > ushort.MaxValue + 1)
            throw new ScoringInputException(ScoringErrorCodes.Options, $"The class count must be 1..65536; got {classCount}.");
        if (filter.MinimumArea < 1)
            throw new ScoringInputException(ScoringErrorCodes.Options, $"Minimum region area must be at least 1 pixel; got {filter.MinimumArea}.");
        PrepareSurface(filter.SurfaceClasses, classCount);

        _generation++;
        _labelsFilled = false;
        _width = width;
        _height = height;
        FindRuns(mask, width, height);
        int components = LabelComponents();

        // Group runs by component (counting sort): each component's runs become one contiguous stretch.
        Grow(ref _componentFirst, components + 1);
        Grow(ref _area, components);
        Array.Clear(_componentFirst, 0, components + 1);
        Array.Clear(_area, 0, components);
        for (int r = 0; r < _runCount; r++)
        {
            int c = _componentOfRun[r];
            _componentFirst[c + 1]++;
            _area[c] += _runEnd[r] - _runStart[r];
        }
        for (int c = 0; c < components; c++) _componentFirst[c + 1] += _componentFirst[c];
        Grow(ref _runOrder, _runCount);
        Grow(ref _regionIdOfComponent, components);
        {
            Span<int> next = components <= 1024 ? stackalloc int[components] : new int[components];
            _componentFirst.AsSpan(0, components).CopyTo(next);
            for (int r = 0; r < _runCount; r++) _runOrder[next[_componentOfRun[r]]++] = r;
        }

        var regions = new List<Region>();
        int droppedByArea = 0, droppedBySurface = 0;
        double frameArea = (double)width * height;
        for (int c = 0; c < components; c++)
        {
            _regionIdOfComponent[c] = 0;
            if (_area[c] < filter.MinimumArea) { droppedByArea++; continue; }
            var region = Describe(c, regions.Count + 1, mask, score, classIndex, classCount, filter.SurfaceClasses is not null, filter.KeepOnlyOnSurface, frameArea);
            if (region is null) { droppedBySurface++; continue; }
            regions.Add(region);
            _regionIdOfComponent[c] = region.Id;
        }
        return new RegionSet(this, _generation, width, height, regions, components, droppedByArea, droppedBySurface);
    }

    private void PrepareSurface(IReadOnlyList<int>? surface, int classCount)
    {
        Grow(ref _isSurface, classCount);
        Array.Clear(_isSurface, 0, classCount);
        if (surface is null) return;
        foreach (int s in surface)
        {
            if (s < 0 || s >= classCount)
                throw new ScoringInputException(ScoringErrorCodes.Options,
                    $"Surface class index {s} is outside the model's classes 0..{classCount - 1}.");
            _isSurface[s] = true;
        }
    }

    // Called once or a few times per frame with long loops: compile fully optimized at once rather than after 30 frames.
    [MethodImpl(MethodImplOptions.AggressiveOptimization)]
    private void FindRuns(ReadOnlySpan<byte> mask, int width, int height)
    {
        _runCount = 0;
        for (int y = 0; y < height; y++)
        {
            var row = mask.Slice(y * width, width);
            int x = 0;
            while (x < width)
            {
                int s = row[x..].IndexOfAnyExcept((byte)0);
                if (s < 0) break;
                s += x;
                int e = row[s..].IndexOf((byte)0);
                e = e < 0 ? width : s + e;
                AddRun(y, s, e);
                x = e;
            }
        }
    }

    private void AddRun(int y, int s, int e)
    {
        if (_runCount == _runRow.Length)
        {
            int n = _runRow.Length * 2;
            Array.Resize(ref _runRow, n);
            Array.Resize(ref _runStart, n);
            Array.Resize(ref _runEnd, n);
            Array.Resize(ref _parent, n);
        }
        _runRow[_runCount] = y;
        _runStart[_runCount] = s;
        _runEnd[_runCount] = e;
        _parent[_runCount] = _runCount;
        _runCount++;
    }

    /// <summary>
    /// Joins each run with the runs of the row above that it touches (8-connectivity: the run widened by one
    /// pixel overlaps them). Roots are always the smallest run index of their set, so numbering roots in run
    /// order numbers components in raster order of their first pixel. Returns the component count.
    /// </summary>
    private int LabelComponents()
    {
        int prevFirst = 0, prevEnd = 0, i = 0;
        while (i < _runCount)
        {
            int y = _runRow[i], rowFirst = i;
            int rowEnd = i;
            while (rowEnd < _runCount && _runRow[rowEnd] == y) rowEnd++;
            if (prevEnd > prevFirst && _runRow[prevFirst] == y - 1)
            {
                int j = prevFirst;
                for (int r = rowFirst; r < rowEnd; r++)
                {
                    int s = _runStart[r], e = _runEnd[r];
                    while (j < prevEnd && _runEnd[j] < s) j++;
                    for (int k = j; k < prevEnd && _runStart[k] <= e; k++) Union(r, k);
                }
            }
            prevFirst = rowFirst;
            prevEnd = rowEnd;
            i = rowEnd;
        }

        Grow(ref _componentOfRun, _runCount);
        int components = 0;
        for (int r = 0; r < _runCount; r++)
        {
            // Parents have smaller indices and were resolved to their roots already.
            int p = _parent[r];
            if (p == r) _componentOfRun[r] = components++;
            else
            {
                int root = _parent[p];
                _parent[r] = root;
                _componentOfRun[r] = _componentOfRun[root];
            }
        }
        return components;
    }

    private int Root(int r)
    {
        while (_parent[r] != r)
        {
            _parent[r] = _parent[_parent[r]];
            r = _parent[r];
        }
        return r;
    }

    private void Union(int a, int b)
    {
        a = Root(a);
        b = Root(b);
        if (a < b) _parent[b] = a;
        else if (b < a) _parent[a] = b;
    }

    /// <summary>Statistics of component <paramref name="c"/>, or null when the surface filter drops it.</summary>
    private Region? Describe(int c, int id, ReadOnlySpan<byte> mask, ReadOnlySpan<float> score, ReadOnlySpan<ushort> cls,
        int classCount, bool surfaceKnown, bool keepOnlyOnSurface, double frameArea)
    {
        int w = _width, h = _height;
        Grow(ref _classCounts, classCount);
        Grow(ref _touchedClasses, classCount);
        int touched = 0;
        int left = int.MaxValue, right = -1, top = int.MaxValue, bottom = -1;
        long sumX = 0, sumY = 0;
        double sumScore = 0;
        float maxScore = float.NegativeInfinity;
        bool touches = false;
        for (int o = _componentFirst[c]; o < _componentFirst[c + 1]; o++)
        {
            int r = _runOrder[o], y = _runRow[r], s = _runStart[r], e = _runEnd[r], len = e - s;
            left = Math.Min(left, s);
            right = Math.Max(right, e - 1);
            top = Math.Min(top, y);
            bottom = Math.Max(bottom, y);
            sumX += (long)len * (s + e - 1) / 2;
            sumY += (long)len * y;
            var sc = score.Slice(y * w + s, len);
            maxScore = Math.Max(maxScore, TensorPrimitives.Max(sc));
            sumScore += TensorPrimitives.Sum(sc);
            foreach (ushort k in cls.Slice(y * w + s, len))
            {
                if (k >= classCount) throw ClassOutOfRange(k, classCount);
                if (_classCounts[k]++ == 0) _touchedClasses[touched++] = k;
            }
        }

        int majority = -1, best = 0;
        for (int t = 0; t < touched; t++)
        {
            int k = _touchedClasses[t], n = _classCounts[k];
            if (n > best || (n == best && k < majority)) { best = n; majority = k; }
            _classCounts[k] = 0;
        }
        // Touching a surface matters only when the region does not stand on one: most regions on an apron do.
        if (surfaceKnown && !_isSurface[majority])
        {
            for (int o = _componentFirst[c]; o < _componentFirst[c + 1] && !touches; o++)
            {
                int r = _runOrder[o];
                touches = TouchesSurface(mask, cls, classCount, _runRow[r], _runStart[r], _runEnd[r]);
            }
        }
        bool onSurface = surfaceKnown && (_isSurface[majority] || touches);
        if (surfaceKnown && keepOnlyOnSurface && !onSurface) return null;
        long area = _area[c];
        return new Region(id, left, top, right - left + 1, bottom - top + 1, area, area / frameArea,
            (double)sumX / area, (double)sumY / area, maxScore, (float)(sumScore / area),
            majority, (double)best / area, onSurface);
    }

    /// <summary>
    /// Whether a pixel just outside run [s, e) of row y, and outside its region, has a surface class. Runs are
    /// maximal, so the pixels left and right of the run are off the mask; above and below, a mask pixel next
    /// to the run is in the same region, so only off-mask pixels count.
    /// </summary>
    private bool TouchesSurface(ReadOnlySpan<byte> mask, ReadOnlySpan<ushort> cls, int classCount, int y, int s, int e)
    {
        int w = _width;
        if (s > 0 && IsSurface(cls[y * w + s - 1], classCount)) return true;
        if (e < w && IsSurface(cls[y * w + e], classCount)) return true;
        int l = Math.Max(s - 1, 0), r = Math.Min(e, w - 1);
        for (int ny = y - 1; ny <= y + 1; ny += 2)
        {
            if (ny < 0 || ny >= _height) continue;
            int row = ny * w;
            for (int x = l; x <= r; x++)
                if (mask[row + x] == 0 && IsSurface(cls[row + x], classCount)) return true;
        }
        return false;
    }

    private bool IsSurface(ushort k, int classCount)
        => k < classCount ? _isSurface[k] : throw ClassOutOfRange(k, classCount);

    private static ScoringInputException ClassOutOfRange(int k, int classCount)
        => new(ScoringErrorCodes.ClassIndexRange, $"The class map holds class {k} but the model has {classCount} classes (0..{classCount - 1}).");

    internal ReadOnlySpan<int> LabelsFor(long generation)
    {
        if (generation != _generation)
            throw new InvalidOperationException("These labels were overwritten: the region finder has since processed another frame.");
        int n = _width * _height;
        if (!_labelsFilled)
        {
            Grow(ref _labels, n);
            var labels = _labels.AsSpan(0, n);
            labels.Clear();
            for (int r = 0; r < _runCount; r++)
            {
                int id = _regionIdOfComponent[_componentOfRun[r]];
                if (id != 0) labels.Slice(_runRow[r] * _width + _runStart[r], _runEnd[r] - _runStart[r]).Fill(id);
            }
            _labelsFilled = true;
        }
        return _labels.AsSpan(0, n);
    }

    private static void Grow<T>(ref T[] buffer, int size)
    {
        if (buffer.Length < size) buffer = new T[Math.Max(size, buffer.Length * 2)];
    }
}
