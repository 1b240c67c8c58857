package crowd

// Assembly kernels (rows_amd64.s) for the float32 EM tables at k = 5; the
// callers (gatherAdd5, scatterAdd5) have checked every index.

//go:noescape
func gatherAdd5f32(dst, src *float32, lab *uint32, n int)

//go:noescape
func scatterAdd5f32(dst, src *float32, lab *uint32, n int)

const haveRows5Asm = true
