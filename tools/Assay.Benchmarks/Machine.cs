using Assay.Kernels;

namespace Assay.Benchmarks;

/// <summary>The machine line every benchmark prints first: the CPU model (/proc/cpuinfo), its cores and the kernel paths this process takes.</summary>
internal static class Machine
{
    public static string Cpu => File.Exists("/proc/cpuinfo")
        ? File.ReadLines("/proc/cpuinfo").FirstOrDefault(l => l.StartsWith("model name", StringComparison.Ordinal))?.Split(':', 2)[1].Trim() ?? "unknown"
        : "unknown";

    public static string Describe() =>
        $"CPU: {Cpu}, {Environment.ProcessorCount} cores; kernels {KernelSelector.Current}, int8 {KernelSelector.CurrentInt8}";
}
