namespace Assay.Config;

/// <summary>The MLP's nonlinearity.</summary>
public enum Activation
{
    /// <summary>GELU with the tanh approximation: 0.5·x·(1 + tanh(√(2/π)·(x + 0.044715·x³))). config.json names
    /// "gelu_new", "gelu_pytorch_tanh" and "gelu_fast" are all this function.</summary>
    GeluTanh,

    /// <summary>Exact GELU: 0.5·x·(1 + erf(x/√2)). config.json name "gelu".</summary>
    GeluErf,

    /// <summary>max(0, x). config.json name "relu".</summary>
    Relu,

    /// <summary>SiLU, x·σ(x) = x / (1 + e^(−x)), the gate of a gated MLP. config.json name "silu".</summary>
    Silu,
}
