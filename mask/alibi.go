package mask

// Distance is d(p, j), the distance the form penalises between the query at
// key position p and key j; the ALiBi bias is −m·d. An invalid form gives 0
// (Check refuses it).
func (f ALiBiForm) Distance(p, j int) int {
	d := p - j
	switch f {
	case ALiBiCausal:
		return d
	case ALiBiSymmetric:
		if d < 0 {
			return -d
		}
		return d
	case ALiBiPastOnly:
		return max(d, 0)
	}
	return 0
}
