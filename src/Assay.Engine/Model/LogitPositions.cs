namespace Assay.Model;

/// <summary>Where the output head is computed.</summary>
public enum LogitPositions
{
    /// <summary>Nowhere: hidden states only.</summary>
    None,

    /// <summary>At each sequence's last position (the next-word distribution after the whole text).</summary>
    Last,

    /// <summary>At every position (for the likelihood of the text itself).</summary>
    All,
}
