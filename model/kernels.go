package model

// KernelName names the forward-pass kernels this CPU runs: "avx512",
// "avx2" or "generic" (plain Go).
func KernelName() string { return activeKernels.name }
