package cluster

import "fmt"

// Label finds the connected components of in (true = suprathreshold) under conn. labels has
// one entry per voxel: 0 outside in, otherwise 1..n; components are numbered in the order of
// their lowest linear index. sizes[l-1] is the number of voxels of component l.
//
// It is union-find in linear index order: each voxel is joined to the roots of its neighbours
// that precede it (half of the stencil), the larger root always under the smaller, so a root is
// the lowest voxel of its component and one final pass in index order assigns the labels.
func Label(in []bool, dims [3]int, conn Connectivity) (labels []int32, sizes []int) {
	n := gridSize(dims)
	if len(in) != n {
		panic(fmt.Sprintf("cluster: mask has %d voxels, dims %v hold %d", len(in), dims, n))
	}
	labels = make([]int32, n)
	sizes = labelInto(labels, in, dims, conn, nil)
	return labels, sizes
}

// rowNeighbour is a preceding row (dj, dk) of the half stencil, with the allowed di as bits
// (1: di = −1, 2: di = 0, 4: di = +1).
type rowNeighbour struct {
	dj, dk int
	mask   uint8
}

// halfRows groups the half stencil of conn by row, leaving out the voxel before the centre in
// its own row (every connectivity has it).
func halfRows(conn Connectivity) []rowNeighbour {
	var rows []rowNeighbour
	for _, o := range conn.offsets(true) {
		if o[1] == 0 && o[2] == 0 {
			continue
		}
		bit := uint8(1) << (o[0] + 1)
		found := false
		for r := range rows {
			if rows[r].dj == o[1] && rows[r].dk == o[2] {
				rows[r].mask |= bit
				found = true
			}
		}
		if !found {
			rows = append(rows, rowNeighbour{dj: o[1], dk: o[2], mask: bit})
		}
	}
	return rows
}

// labelInto labels in into lab (every entry is written) and returns the sizes, appended to
// sizes[:0]. During the union-find pass lab holds parent+1 (0 = outside), and every parent
// index is below its child's.
func labelInto(lab []int32, in []bool, dims [3]int, conn Connectivity, sizes []int) []int {
	nx, ny, nz := dims[0], dims[1], dims[2]
	rows := halfRows(conn)
	type rowOff struct {
		off  int
		mask uint8
	}
	var nb [9]rowOff
	for k := 0; k < nz; k++ {
		for j := 0; j < ny; j++ {
			base := nx * (j + ny*k)
			m := 0
			for _, r := range rows {
				if j+r.dj >= 0 && j+r.dj < ny && k+r.dk >= 0 {
					nb[m] = rowOff{off: base + nx*(r.dj+ny*r.dk), mask: r.mask}
					m++
				}
			}
			row := in[base : base+nx]
			for i, ok := range row {
				v := int32(base + i)
				if !ok {
					lab[v] = 0
					continue
				}
				cur := v
				if i > 0 && row[i-1] {
					cur = findLabel(lab, v-1)
				}
				for _, r := range nb[:m] {
					o := r.off + i
					if r.mask&1 != 0 && i > 0 && in[o-1] {
						cur = unionLabel(lab, cur, findLabel(lab, int32(o-1)))
					}
					if r.mask&2 != 0 && in[o] {
						cur = unionLabel(lab, cur, findLabel(lab, int32(o)))
					}
					if r.mask&4 != 0 && i < nx-1 && in[o+1] {
						cur = unionLabel(lab, cur, findLabel(lab, int32(o+1)))
					}
				}
				lab[v] = cur + 1
			}
		}
	}
	// Parents precede children, so one pass in index order turns parents into labels.
	sizes = sizes[:0]
	next := int32(0)
	for v, p := range lab {
		if p == 0 {
			continue
		}
		if p-1 == int32(v) {
			next++
			lab[v] = next
			sizes = append(sizes, 1)
			continue
		}
		l := lab[p-1]
		lab[v] = l
		sizes[l-1]++
	}
	return sizes
}

// findLabel returns the root of x, halving the path on the way (lab holds parent+1).
func findLabel(lab []int32, x int32) int32 {
	for {
		p := lab[x] - 1
		if p == x {
			return x
		}
		gp := lab[p] - 1
		if gp == p {
			return p
		}
		lab[x] = gp + 1
		x = gp
	}
}

// unionLabel joins roots a and b, the larger index under the smaller, and returns the new root.
func unionLabel(lab []int32, a, b int32) int32 {
	if a == b {
		return a
	}
	if a > b {
		a, b = b, a
	}
	lab[b] = a + 1
	return a
}
