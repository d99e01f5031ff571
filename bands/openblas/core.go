package openblas

import (
	"os"
	"strings"
	"syscall"

	"golang.org/x/sys/cpu"
)

// CoreEnv is the environment variable through which OpenBLAS builds with
// several kernels (DYNAMIC_ARCH, as Debian's) take the CPU kernel to use
// instead of the one they detect.
const CoreEnv = "OPENBLAS_CORETYPE"

// ReplacementCore returns the OpenBLAS kernel to start the process with when
// the library chose a kernel far weaker than the CPU supports, and "" when
// its own choice should stand.
//
// OpenBLAS picks its kernel from the CPU model number when the library is
// loaded. A library older than the processor does not know the model and
// falls back to a generic SSE3 kernel ("Prescott"): seen with Debian's
// OpenBLAS 0.3.21 on a Xeon of family 6 model 207, where dsyrk for 224 bands
// ran at about 13 GFLOP/s against about 63 with the AVX-512 kernel. The
// choice is read once, before main runs, so the only remedy is to start the
// process again with OPENBLAS_CORETYPE set; a value the user set is always
// kept.
func ReplacementCore() string {
	if _, set := os.LookupEnv(CoreEnv); set {
		return ""
	}
	return replacement(CoreName(), features{
		avx512: cpu.X86.HasAVX512F && cpu.X86.HasAVX512DQ && cpu.X86.HasAVX512BW && cpu.X86.HasAVX512VL,
		avx2:   cpu.X86.HasAVX2 && cpu.X86.HasFMA,
	})
}

// features are the instruction sets OpenBLAS's x86-64 kernels need.
type features struct{ avx512, avx2 bool }

// generic lists OpenBLAS's x86-64 kernels older than AVX2, in lower case: a
// CPU that has AVX2 and FMA but runs one of them was not recognised.
var generic = map[string]bool{
	"prescott": true, "core2": true, "penryn": true, "dunnington": true,
	"nehalem": true, "atom": true, "sandybridge": true, "barcelona": true,
	"bobcat": true, "bulldozer": true, "piledriver": true, "steamroller": true,
	"excavator": true, "opteron": true, "opteron_sse3": true, "katmai": true,
	"coppermine": true, "northwood": true, "banias": true,
}

// replacement decides for a kernel name (as openblas_get_corename gives it)
// and the CPU's features: SkylakeX for AVX-512 (the AVX-512 kernels of
// OpenBLAS since 0.3.x), Haswell for AVX2 with FMA, nothing otherwise.
func replacement(core string, f features) string {
	if !generic[strings.ToLower(strings.TrimSpace(core))] {
		return ""
	}
	switch {
	case f.avx512:
		return "SkylakeX"
	case f.avx2:
		return "Haswell"
	}
	return ""
}

// Restart starts the running program again, in the same process (same
// arguments, same process ID), with OPENBLAS_CORETYPE set to
// ReplacementCore's choice, when there is one. It returns when no restart is
// needed or when it cannot happen; the program then runs on OpenBLAS's own,
// slower, kernel, with correct results. Call it first thing in main (or
// TestMain), before any goroutine starts work.
func Restart() {
	core := ReplacementCore()
	if core == "" {
		return
	}
	exe, err := os.Executable()
	if err != nil {
		return
	}
	_ = syscall.Exec(exe, os.Args, append(os.Environ(), CoreEnv+"="+core)) // returns only on failure
}
