package frameio

import "sort"

// naturalLess orders names the way people number frames: runs of digits
// compare by their numeric value, so "f2" sorts before "f10". Other bytes
// compare as bytes. Names equal up to leading zeros ("f2", "f02") are
// ordered by the plain byte comparison so that the order is total.
func naturalLess(a, b string) bool {
	i, j := 0, 0
	for i < len(a) && j < len(b) {
		ca, cb := a[i], b[j]
		if isDigit(ca) && isDigit(cb) {
			si, sj := i, j
			for i < len(a) && isDigit(a[i]) {
				i++
			}
			for j < len(b) && isDigit(b[j]) {
				j++
			}
			na, nb := trimZeros(a[si:i]), trimZeros(b[sj:j])
			if len(na) != len(nb) {
				return len(na) < len(nb)
			}
			if na != nb {
				return na < nb
			}
			continue
		}
		if ca != cb {
			return ca < cb
		}
		i++
		j++
	}
	if (len(a) - i) != (len(b) - j) {
		return len(a)-i < len(b)-j
	}
	return a < b
}

// SortNatural sorts names in place by naturalLess.
func SortNatural(names []string) {
	sort.SliceStable(names, func(i, j int) bool { return naturalLess(names[i], names[j]) })
}

func isDigit(c byte) bool { return c >= '0' && c <= '9' }

func trimZeros(s string) string {
	for len(s) > 1 && s[0] == '0' {
		s = s[1:]
	}
	return s
}
