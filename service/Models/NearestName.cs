namespace Strayspot.Service.Models;

/// <summary>The closest of a set of names to a misspelt one (edit distance with swaps), for "did you mean" hints.</summary>
public static class NearestName
{
    /// <summary>The nearest name, or null when none is close (more than a third of the word would have to change).</summary>
    public static string? Find(string given, IEnumerable<string> names)
    {
        string? best = null;
        int bestDistance = int.MaxValue;
        foreach (var name in names)
        {
            int d = Distance(given.ToLowerInvariant(), name.ToLowerInvariant());
            if (d < bestDistance) (best, bestDistance) = (name, d);
        }
        return best is not null && bestDistance <= Math.Max(2, given.Length / 3) ? best : null;
    }

    /// <summary>Optimal string alignment distance: insertions, deletions, substitutions and swaps of neighbours cost 1.</summary>
    public static int Distance(string a, string b)
    {
        var d = new int[a.Length + 1, b.Length + 1];
        for (int i = 0; i <= a.Length; i++) d[i, 0] = i;
        for (int j = 0; j <= b.Length; j++) d[0, j] = j;
        for (int i = 1; i <= a.Length; i++)
            for (int j = 1; j <= b.Length; j++)
            {
                int cost = a[i - 1] == b[j - 1] ? 0 : 1;
                d[i, j] = Math.Min(Math.Min(d[i - 1, j] + 1, d[i, j - 1] + 1), d[i - 1, j - 1] + cost);
                if (i > 1 && j > 1 && a[i - 1] == b[j - 2] && a[i - 2] == b[j - 1])
                    d[i, j] = Math.Min(d[i, j], d[i - 2, j - 2] + 1);
            }
        return d[a.Length, b.Length];
    }
}
