using Assay.Kernels;

namespace Assay.Benchmarks;

/// <summary>The machine line every benchmark prints first: the CPU model (/proc/cpuinfo), its cores and the kernel paths this process takes.</summary>
internal static class Machine
{
    public static string Cpu => KernelSelector.CpuModel;

    public static string Describe() =>
        $"CPU: {Cpu}, {Environment.ProcessorCount} cores; kernels {KernelSelector.Current}, int8 {KernelSelector.CurrentInt8}";
}
