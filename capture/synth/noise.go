package synth

import "math"

// splitmix64 is a counter-based hash: the same input always gives the same
// output, so noise does not depend on the order pixels are rendered in.
func splitmix64(x uint64) uint64 {
	x += 0x9e3779b97f4a7c15
	x = (x ^ (x >> 30)) * 0xbf58476d1ce4e5b9
	x = (x ^ (x >> 27)) * 0x94d049bb133111eb
	return x ^ (x >> 31)
}

// gauss returns an approximately standard-normal value for key (sum of four
// 16-bit uniforms, rescaled to unit variance).
func gauss(key uint64) float64 {
	h := splitmix64(key)
	s := float64(h&0xffff) + float64((h>>16)&0xffff) + float64((h>>32)&0xffff) + float64(h>>48)
	return (s/65535 - 2) * 1.7320508075688772
}

// lattice returns a uniform value in [0, 1) for an integer lattice point.
func lattice(seed uint64, i, j int64) float64 {
	h := splitmix64(seed ^ uint64(i)*0x632be59bd9b4e019 ^ uint64(j)*0x8cb92ba72f3d8dd7)
	return float64(h>>11) / (1 << 53)
}

// valueNoise is smooth 2-D value noise in [0, 1) with unit lattice spacing.
func valueNoise(seed uint64, x, y float64) float64 {
	fx, fy := math.Floor(x), math.Floor(y)
	i, j := int64(fx), int64(fy)
	tx, ty := x-fx, y-fy
	tx = tx * tx * (3 - 2*tx)
	ty = ty * ty * (3 - 2*ty)
	a := lattice(seed, i, j)
	b := lattice(seed, i+1, j)
	c := lattice(seed, i, j+1)
	d := lattice(seed, i+1, j+1)
	return lerp(lerp(a, b, tx), lerp(c, d, tx), ty)
}

// texture is a tileable grey mottling with a mip pyramid, sampled by floor
// position and pixel footprint so that distant floor does not sparkle.
type texture struct {
	texelM float64
	levels [][]float32 // level l is (size>>l)² texels, values centred on 0
	size   int
}

func newTexture(seed uint64, size int, texelM float64) *texture {
	t := &texture{texelM: texelM, size: size}
	base := make([]float32, size*size)
	// octaves with periods that divide size, so the tile wraps seamlessly
	for j := 0; j < size; j++ {
		for i := 0; i < size; i++ {
			var v, amp, norm float64 = 0, 1, 0
			for o, period := 0, size/4; period >= 2; o, period = o+1, period/2 {
				n := float64(size / period)
				x, y := float64(i)/float64(period), float64(j)/float64(period)
				v += amp * wrapNoise(seed+uint64(o), x, y, n)
				norm += amp
				amp *= 0.6
			}
			base[j*size+i] = float32(v/norm - 0.5)
		}
	}
	t.levels = append(t.levels, base)
	for s := size / 2; s >= 4; s /= 2 {
		prev := t.levels[len(t.levels)-1]
		lv := make([]float32, s*s)
		for j := 0; j < s; j++ {
			for i := 0; i < s; i++ {
				p := 2 * s
				lv[j*s+i] = (prev[2*j*p+2*i] + prev[2*j*p+2*i+1] + prev[(2*j+1)*p+2*i] + prev[(2*j+1)*p+2*i+1]) / 4
			}
		}
		t.levels = append(t.levels, lv)
	}
	return t
}

// wrapNoise is value noise whose lattice repeats every n cells.
func wrapNoise(seed uint64, x, y, n float64) float64 {
	fx, fy := math.Floor(x), math.Floor(y)
	tx, ty := x-fx, y-fy
	tx = tx * tx * (3 - 2*tx)
	ty = ty * ty * (3 - 2*ty)
	m := int64(n)
	i, j := int64(fx)%m, int64(fy)%m
	i1, j1 := (i+1)%m, (j+1)%m
	a := lattice(seed, i, j)
	b := lattice(seed, i1, j)
	c := lattice(seed, i, j1)
	d := lattice(seed, i1, j1)
	return lerp(lerp(a, b, tx), lerp(c, d, tx), ty)
}

// at samples the texture at floor point (x, y) for a pixel footprint of fp
// metres; the result is centred on 0 with a range of about ±0.5.
func (t *texture) at(x, y, fp float64) float64 {
	l := 0
	cell := t.texelM
	for l < len(t.levels)-1 && fp > 1.5*cell {
		l++
		cell *= 2
	}
	s := t.size >> l
	i := int(math.Floor(x/cell)) & (s - 1)
	j := int(math.Floor(y/cell)) & (s - 1)
	return float64(t.levels[l][j*s+i])
}
