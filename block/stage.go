package block

// Stage names one intermediate tensor of a block call. Stages lists them
// in pipeline order with their shapes; Options.Keep chooses which a call
// returns.
type Stage string

// The stages, in pipeline order. T is Tokens, W Width, H Heads, G
// HeadsKV, D HeadDim, P Past.
const (
	StageInput    Stage = "input"     // [T, W] the hidden states given
	StageAttnIn   Stage = "attn_in"   // [T, W] what the attention sublayer reads: N₁(x), or x with PostNorm
	StageQ        Stage = "q"         // [T, H, D] the query projection, bias added
	StageK        Stage = "k"         // [T, G, D] the key projection, bias added
	StageV        Stage = "v"         // [T, G, D] the value projection, bias added
	StageQRot     Stage = "q_rot"     // [T, H, D] the queries after the rotary encoding (q without one)
	StageKRot     Stage = "k_rot"     // [T, G, D] the keys after the rotary encoding (k without one)
	StagePresentK Stage = "present_k" // [P + T, G, D] the past keys and the new ones
	StagePresentV Stage = "present_v" // [P + T, G, D] the past values and the new ones
	StageAttn     Stage = "attn"      // [T, H, D] the attention output, heads of one token contiguous
	StageAttnOut  Stage = "attn_out"  // [T, W] the output projection, bias added
	StageResid1   Stage = "resid1"    // [T, W] x + attn_out
	StageFFNIn    Stage = "ffn_in"    // [T, W] what the FFN reads: N₂(resid1), N₁(resid1) with PostNorm, attn_in with Parallel
	StageFFNOut   Stage = "ffn_out"   // [T, W] the FFN output
	StageResid2   Stage = "resid2"    // [T, W] the stream before the last norm (PostNorm) or the output: h + ffn_out
	StageOutput   Stage = "output"    // [T, W] the block's output, Result.Out
)

var stages = []Stage{StageInput, StageAttnIn, StageQ, StageK, StageV, StageQRot, StageKRot,
	StagePresentK, StagePresentV, StageAttn, StageAttnOut, StageResid1, StageFFNIn, StageFFNOut, StageResid2, StageOutput}

// Stages returns every stage in pipeline order.
func Stages() []Stage { return append([]Stage(nil), stages...) }

// Shape returns the shape of stage s's tensor for d, or nil for a name
// that is none of Stages.
func (s Stage) Shape(d Dims) []int {
	T, W, H, G, D := d.Tokens, d.Width, d.Heads, d.HeadsKV, d.HeadDim
	switch s {
	case StageInput, StageAttnIn, StageAttnOut, StageResid1, StageFFNIn, StageFFNOut, StageResid2, StageOutput:
		return []int{T, W}
	case StageQ, StageQRot, StageAttn:
		return []int{T, H, D}
	case StageK, StageV, StageKRot:
		return []int{T, G, D}
	case StagePresentK, StagePresentV:
		return []int{d.Past + T, G, D}
	}
	return nil
}
