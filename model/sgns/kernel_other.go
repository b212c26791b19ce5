//go:build !amd64

package sgns

const useAVX2 = false

func dotAVX2(x, y []float32) float32     { return dotGeneric(x, y) }
func axpyAVX2(a float32, x, y []float32) { axpyGeneric(a, x, y) }

// dot is the inner product of x and y[:len(x)].
func dot(x, y []float32) float32 { return dotGeneric(x, y) }

// axpy adds a·x to y[:len(x)].
func axpy(a float32, x, y []float32) { axpyGeneric(a, x, y) }
