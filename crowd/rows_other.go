//go:build !amd64

package crowd

func gatherAdd5f32(dst, src *float32, lab *uint32, n int) {
	panic("crowd: no assembly kernel on this architecture")
}

func scatterAdd5f32(dst, src *float32, lab *uint32, n int) {
	panic("crowd: no assembly kernel on this architecture")
}

const haveRows5Asm = false
