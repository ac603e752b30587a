package mask

import "github.com/plumbref/plumb/internal/vocab"

// ALiBiForm is the key distance that ALiBi penalises (Press et al. 2022,
// "Train Short, Test Long: Attention with Linear Biases Enables Input
// Length Extrapolation", arXiv 2108.12409, §3). The bias of head h for the
// query at key position p and key j is −m_h·d(p, j), with d given by the
// form (see Distance). It lives in this package because it is a fact of
// positions, shared by the attention package (which adds the bias to the
// logits) and the posenc package (which writes it out as a tensor), so that
// both mean the same thing by each form.
//
// The paper defines the bias for the keys a causal model sees, j ≤ p:
// softmax(q_i Kᵀ + m·[−(i−1), …, −2, −1, 0]), that is −m·(p − j). The
// forms differ only in what they give keys after the query, which a causal
// mask hides; under a causal mask all three give the same logits.
type ALiBiForm int

const (
	// ALiBiCausal is the paper's formula for every key: d = p − j. Keys
	// after the query (j > p), which the paper's causal model never shows,
	// get a positive bias m·(j − p) when a mask lets them through. It is the
	// zero value, and what a kernel gets that builds the bias as m·(j − p)
	// or, equivalently after the softmax, as m·j.
	ALiBiCausal ALiBiForm = iota
	// ALiBiSymmetric penalises distance both ways, d = |p − j|, a form used
	// for attention without a causal mask [common practice].
	ALiBiSymmetric
	// ALiBiPastOnly is the paper's bias for keys up to the query and none
	// after it: d = max(p − j, 0), what a kernel gets that clamps the
	// distance at 0 or builds only the lower triangle of the bias.
	ALiBiPastOnly
)

var alibiWords = vocab.New("mask", "ALiBi form", "which key distance ALiBi penalises", ErrALiBi,
	vocab.W(ALiBiCausal, "causal", "−m·(p − j) for every key, the paper's formula; keys after the query get a positive bias"),
	vocab.W(ALiBiSymmetric, "symmetric", "−m·|p − j|: distance penalised both ways"),
	vocab.W(ALiBiPastOnly, "past-only", "−m·(p − j) for keys up to the query, 0 for keys after it"),
)

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

// String returns f's word ("past-only").
func (f ALiBiForm) String() string { return alibiWords.String(f) }

// MarshalText returns f's word; a value with none is an error wrapping
// ErrALiBi.
func (f ALiBiForm) MarshalText() ([]byte, error) { return alibiWords.Marshal(f) }

// UnmarshalText sets f from its word; any other text is an error wrapping
// ErrALiBi that lists the words.
// A nil receiver is an error wrapping the same sentinel, not a panic.
func (f *ALiBiForm) UnmarshalText(b []byte) error { return alibiWords.Unmarshal(f, b) }

// Meaning returns one line saying what f means.
func (f ALiBiForm) Meaning() string { return alibiWords.Meaning(f) }

// Values lists every ALiBiForm, the zero value first.
func (ALiBiForm) Values() []ALiBiForm { return alibiWords.Values() }

// Check returns nil if f is one of the ALiBiForm constants, or an error
// wrapping ErrALiBi that lists the words.
func (f ALiBiForm) Check() error { return alibiWords.Check(f) }
