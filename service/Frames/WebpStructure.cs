using System.Buffers.Binary;

namespace Strayspot.Service.Frames;

/// <summary>
/// The WebP decoder fills a cut-off image instead of failing, which would score a half-blank frame as real data.
/// A WebP file is a RIFF container (RIFF size, then chunks of FourCC, little-endian size and data padded to an even
/// length): it is whole when the file holds every byte the RIFF header and each chunk declare.
/// </summary>
internal static class WebpStructure
{
    public static bool IsComplete(ReadOnlySpan<byte> webp)
    {
        if (webp.Length < 12 || !webp[..4].SequenceEqual("RIFF"u8) || !webp.Slice(8, 4).SequenceEqual("WEBP"u8)) return false;
        long riffEnd = 8L + BinaryPrimitives.ReadUInt32LittleEndian(webp[4..]);
        if (riffEnd > webp.Length) return false;
        long i = 12;
        while (i < riffEnd)
        {
            if (i + 8 > riffEnd) return false;
            long size = BinaryPrimitives.ReadUInt32LittleEndian(webp[(int)(i + 4)..]);
            i += 8 + size + (size & 1);
            // The last chunk's pad byte may be missing in files from some encoders.
            if (i > riffEnd + 1) return false;
        }
        return true;
    }
}
