using System.Runtime.InteropServices;

namespace Assay.Trainer;

/// <summary>
/// glibc's allocator serves every block over 32 MiB with a fresh mmap and returns it on free, so each of the step's
/// [batch · context × vocabulary] logits tensors is page-faulted in anew: measured here, two thirds of a training
/// step went to the kernel. Turning mmap off for malloc (M_MMAP_MAX = 0) and never trimming the heap lets freed blocks
/// be reused: a step of 8 × 128 tokens went from 2.4 s to 0.8 s, with the same losses.
/// </summary>
internal static partial class Allocator
{
    private const int TrimThreshold = -1;   // M_TRIM_THRESHOLD in malloc.h
    private const int MmapMax = -4;         // M_MMAP_MAX

    public static void KeepFreedMemory()
    {
        if (OperatingSystem.IsLinux())
        {
            _ = Mallopt(MmapMax, 0);
            _ = Mallopt(TrimThreshold, int.MaxValue);
        }
    }

    [LibraryImport("libc", EntryPoint = "mallopt")]
    private static partial int Mallopt(int parameter, int value);
}
