namespace Assay.Fixtures;

/// <summary>
/// The byte → symbol table of byte-level BPE (common practice, as published with GPT-2): printable bytes
/// '!'…'~', '¡'…'¬', '®'…'ÿ' stand for themselves; the other 68 bytes map, in byte order, to U+0100, U+0101, ….
/// </summary>
public static class ByteLevel
{
    public static string[] Symbols()
    {
        string[] map = new string[256];
        int next = 256;
        for (int b = 0; b < 256; b++)
        {
            bool printable = (b >= '!' && b <= '~') || (b >= 0xA1 && b <= 0xAC) || (b >= 0xAE && b <= 0xFF);
            map[b] = ((char)(printable ? b : next++)).ToString();
        }
        return map;
    }

    public static string Encode(ReadOnlySpan<byte> bytes)
    {
        string[] map = Symbols();
        var s = new System.Text.StringBuilder(bytes.Length);
        foreach (byte b in bytes)
        {
            s.Append(map[b]);
        }
        return s.ToString();
    }
}
