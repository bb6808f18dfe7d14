using System.Data.Common;

namespace Strayspot.Service.Store;

/// <summary>Reading rows the same way on both engines.</summary>
internal static class DbRows
{
    /// <summary>Runs the query and turns each row into a <typeparamref name="T"/>.</summary>
    public static List<T> Read<TReader, T>(DbCommand cmd, Func<TReader, T> row) where TReader : DbDataReader
    {
        var list = new List<T>();
        using var r = (TReader)cmd.ExecuteReader();
        while (r.Read()) list.Add(row(r));
        return list;
    }

    public static string? Str(DbDataReader r, string column)
    {
        int i = r.GetOrdinal(column);
        return r.IsDBNull(i) ? null : r.GetString(i);
    }
}
