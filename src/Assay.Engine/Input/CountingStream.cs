using System.Security.Cryptography;

namespace Assay.Input;

/// <summary>
/// A read-only view of an input that counts the bytes read, lets the first bytes be looked at before they are read,
/// and (for a pipe, which cannot be read twice) hashes every byte as it passes.
/// </summary>
internal sealed class CountingStream(Stream inner, bool hash) : Stream
{
    private readonly IncrementalHash? _hash = hash ? IncrementalHash.CreateHash(HashAlgorithmName.SHA256) : null;
    private byte[] _peeked = [];
    private int _peekedAt;

    /// <summary>Bytes handed out so far.</summary>
    public long Count { get; private set; }

    public override bool CanRead => true;

    public override bool CanSeek => false;

    public override bool CanWrite => false;

    public override long Length => throw new NotSupportedException();

    public override long Position
    {
        get => Count;
        set => throw new NotSupportedException();
    }

    /// <summary>Up to <paramref name="count"/> first bytes (fewer at the end of the input), still to be read.</summary>
    public ReadOnlySpan<byte> Peek(int count)
    {
        if (Count > 0 || _peeked.Length > 0)
        {
            throw new InvalidOperationException("only the start of the input can be looked at");
        }
        byte[] buffer = new byte[count];
        int n = inner.ReadAtLeast(buffer, count, throwOnEndOfStream: false);
        _peeked = buffer[..n];
        return _peeked;
    }

    /// <summary>The SHA-256 of every byte read so far, lower-case hexadecimal.</summary>
    public string Sha256() => _hash is { } h
        ? Convert.ToHexStringLower(h.GetCurrentHash())
        : throw new InvalidOperationException("the input is a file: hash it by its path");

    public override int Read(byte[] buffer, int offset, int count) => Read(buffer.AsSpan(offset, count));

    public override int Read(Span<byte> buffer)
    {
        int n;
        if (_peekedAt < _peeked.Length)
        {
            n = Math.Min(buffer.Length, _peeked.Length - _peekedAt);
            _peeked.AsSpan(_peekedAt, n).CopyTo(buffer);
            _peekedAt += n;
        }
        else
        {
            n = inner.Read(buffer);
        }
        _hash?.AppendData(buffer[..n]);
        Count += n;
        return n;
    }

    public override void Flush()
    {
    }

    public override long Seek(long offset, SeekOrigin origin) => throw new NotSupportedException();

    public override void SetLength(long value) => throw new NotSupportedException();

    public override void Write(byte[] buffer, int offset, int count) => throw new NotSupportedException();

    protected override void Dispose(bool disposing)
    {
        if (disposing)
        {
            _hash?.Dispose();
        }
        base.Dispose(disposing);
    }
}
