namespace Assay.Tokenization;

/// <summary>Whether a sequence starts with the tokenizer's beginning-of-sequence token (<c>--bos</c>).</summary>
public enum BeginningOfSequence
{
    /// <summary>As the checkpoint's tokenizer configuration says (tokenizer_config.json "add_bos_token"); none when it says nothing.</summary>
    Auto,

    /// <summary>Always; refused when the tokenizer has no such token.</summary>
    Always,

    /// <summary>Never.</summary>
    Never,
}
