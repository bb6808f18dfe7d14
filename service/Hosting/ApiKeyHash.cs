using System.Security.Cryptography;
using System.Text;

namespace Strayspot.Service.Hosting;

/// <summary>SHA-256 of an API key, compared in constant time so a wrong key leaks nothing through timing.</summary>
public static class ApiKeyHash
{
    public static byte[] Of(string key) => SHA256.HashData(Encoding.UTF8.GetBytes(key));

    public static string HexOf(string key) => Convert.ToHexStringLower(Of(key));

    public static bool TryParseHex(string? hex, out byte[] hash)
    {
        hash = [];
        if (hex is null || hex.Length != 64) return false;
        try { hash = Convert.FromHexString(hex); return true; }
        catch (FormatException) { return false; }
    }
}
