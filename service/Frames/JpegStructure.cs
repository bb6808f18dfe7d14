namespace Strayspot.Service.Frames;

/// <summary>
/// The JPEG decoder fills a cut-off scan with grey instead of failing, which would score a half-grey frame as
/// real data. This walks the marker segments (skipping embedded thumbnails inside APPn) to the end-of-image marker.
/// </summary>
internal static class JpegStructure
{
    public static bool ReachesEndOfImage(ReadOnlySpan<byte> jpeg)
    {
        if (jpeg.Length < 4 || jpeg[0] != 0xFF || jpeg[1] != 0xD8) return false;
        int i = 2;
        while (i + 1 < jpeg.Length)
        {
            if (jpeg[i] != 0xFF) return false;
            byte marker = jpeg[i + 1];
            if (marker == 0xFF) { i++; continue; } // fill byte
            if (marker == 0xD9) return true;
            if (marker is 0x01 or (>= 0xD0 and <= 0xD7)) { i += 2; continue; } // no length field
            if (i + 3 >= jpeg.Length) return false;
            int length = (jpeg[i + 2] << 8) | jpeg[i + 3];
            if (length < 2) return false;
            i += 2 + length;
            if (marker != 0xDA) continue;
            // Entropy-coded data: a real marker is 0xFF followed by neither 0x00 (stuffing) nor a restart marker.
            while (true)
            {
                int ff = jpeg[Math.Min(i, jpeg.Length)..].IndexOf((byte)0xFF);
                if (ff < 0 || i + ff + 1 >= jpeg.Length) return false;
                i += ff;
                byte next = jpeg[i + 1];
                if (next == 0x00 || next is >= 0xD0 and <= 0xD7 || next == 0xFF) { i += next == 0xFF ? 1 : 2; continue; }
                break;
            }
        }
        return false;
    }
}
