namespace Strayspot.Tests.Support;

/// <summary>
/// Builds a baseline 8×8 four-component (CMYK) JPEG of one flat colour by hand: ImageSharp 2.1 cannot write CMYK.
/// Flat blocks need only a DC coefficient, so the Huffman tables hold two DC categories (10 and 11) and the
/// end-of-block code. Carries an Adobe APP14 segment (transform 0), which marks the usual inverted CMYK storage.
/// </summary>
public static class CmykJpeg
{
    /// <param name="stored">The four stored sample values (C, M, Y, K as written in the file), each 0 or 255.</param>
    public static byte[] Flat8x8(byte[] stored)
    {
        var o = new List<byte> { 0xFF, 0xD8 };
        // APP14 "Adobe": version 100, flags 0, 0, transform 0 (no colour transform: CMYK as stored).
        Segment(o, 0xEE, [.. "Adobe"u8.ToArray(), 0x00, 0x64, 0, 0, 0, 0, 0]);
        Segment(o, 0xDB, [0x00, .. Enumerable.Repeat((byte)1, 64)]); // quantization table 0: all ones
        Segment(o, 0xC0, [8, 0, 8, 0, 8, 4, 1, 0x11, 0, 2, 0x11, 0, 3, 0x11, 0, 4, 0x11, 0]); // 8-bit, 8×8, 4 comps
        var dcBits = new byte[16]; dcBits[1] = 2; // two codes of length 2: 00 → category 10, 01 → category 11
        Segment(o, 0xC4, [0x00, .. dcBits, 10, 11]);
        var acBits = new byte[16]; acBits[0] = 1; // one code of length 1: 0 → end of block
        Segment(o, 0xC4, [0x10, .. acBits, 0x00]);
        Segment(o, 0xDA, [4, 1, 0x00, 2, 0x00, 3, 0x00, 4, 0x00, 0, 63, 0]);
        var bits = new List<int>();
        foreach (byte s in stored)
        {
            // A flat block's DC is 8 × (sample − 128); only ±1016 and −1024 occur for samples 255 and 0.
            int dc = 8 * (s - 128);
            if (s == 255) { Put(bits, 0b00, 2); Put(bits, dc, 10); }
            else if (s == 0) { Put(bits, 0b01, 2); Put(bits, dc + 2047, 11); }
            else throw new ArgumentException("Only samples 0 and 255 are supported.");
            Put(bits, 0, 1); // end of block
        }
        while (bits.Count % 8 != 0) bits.Add(1);
        for (int i = 0; i < bits.Count; i += 8)
        {
            int b = 0;
            for (int k = 0; k < 8; k++) b = (b << 1) | bits[i + k];
            o.Add((byte)b);
            if (b == 0xFF) o.Add(0x00);
        }
        o.AddRange([0xFF, 0xD9]);
        return o.ToArray();
    }

    private static void Segment(List<byte> o, byte marker, byte[] payload)
    {
        o.Add(0xFF); o.Add(marker);
        int len = payload.Length + 2;
        o.Add((byte)(len >> 8)); o.Add((byte)len);
        o.AddRange(payload);
    }

    private static void Put(List<int> bits, int value, int count)
    {
        for (int k = count - 1; k >= 0; k--) bits.Add((value >> k) & 1);
    }
}
