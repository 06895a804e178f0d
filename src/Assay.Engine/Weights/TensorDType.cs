namespace Assay.Weights;

/// <summary>Element types of the safetensors format. Only the floating types can hold model parameters.</summary>
public enum TensorDType
{
    /// <summary>IEEE 754 binary32.</summary>
    F32,
    /// <summary>IEEE 754 binary16.</summary>
    F16,
    /// <summary>bfloat16: the upper 16 bits of a binary32.</summary>
    BF16,
    /// <summary>IEEE 754 binary64.</summary>
    F64,
    /// <summary>8-bit float, 4 exponent and 3 mantissa bits.</summary>
    F8E4M3,
    /// <summary>8-bit float, 5 exponent and 2 mantissa bits.</summary>
    F8E5M2,
    /// <summary>Signed 64-bit integer.</summary>
    I64,
    /// <summary>Signed 32-bit integer.</summary>
    I32,
    /// <summary>Signed 16-bit integer.</summary>
    I16,
    /// <summary>Signed 8-bit integer.</summary>
    I8,
    /// <summary>Unsigned 64-bit integer.</summary>
    U64,
    /// <summary>Unsigned 32-bit integer.</summary>
    U32,
    /// <summary>Unsigned 16-bit integer.</summary>
    U16,
    /// <summary>Unsigned 8-bit integer.</summary>
    U8,
    /// <summary>One byte per boolean.</summary>
    Bool,
}

/// <summary>Facts about each <see cref="TensorDType"/>.</summary>
public static class TensorDTypes
{
    /// <summary>Parses the dtype strings of the safetensors header; null when the string is not one of them.</summary>
    internal static TensorDType? Parse(string s) => s switch
    {
        "F32" => TensorDType.F32,
        "F16" => TensorDType.F16,
        "BF16" => TensorDType.BF16,
        "F64" => TensorDType.F64,
        "F8_E4M3" => TensorDType.F8E4M3,
        "F8_E5M2" => TensorDType.F8E5M2,
        "I64" => TensorDType.I64,
        "I32" => TensorDType.I32,
        "I16" => TensorDType.I16,
        "I8" => TensorDType.I8,
        "U64" => TensorDType.U64,
        "U32" => TensorDType.U32,
        "U16" => TensorDType.U16,
        "U8" => TensorDType.U8,
        "BOOL" => TensorDType.Bool,
        _ => null,
    };

    /// <summary>The dtype's spelling in a safetensors header.</summary>
    public static string Name(this TensorDType t) => t switch
    {
        TensorDType.F8E4M3 => "F8_E4M3",
        TensorDType.F8E5M2 => "F8_E5M2",
        TensorDType.Bool => "BOOL",
        _ => t.ToString(),
    };

    /// <summary>Bytes per element.</summary>
    public static int SizeInBytes(this TensorDType t) => t switch
    {
        TensorDType.F64 or TensorDType.I64 or TensorDType.U64 => 8,
        TensorDType.F32 or TensorDType.I32 or TensorDType.U32 => 4,
        TensorDType.F16 or TensorDType.BF16 or TensorDType.I16 or TensorDType.U16 => 2,
        _ => 1,
    };

    /// <summary>True for the types the engine converts to float32 parameters.</summary>
    public static bool IsParameterType(this TensorDType t) =>
        t is TensorDType.F32 or TensorDType.F16 or TensorDType.BF16;
}
