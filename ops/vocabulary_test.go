package ops

import (
	"bytes"
	"encoding/json"
	"testing"

	"github.com/plumbref/plumb/internal/expect/ensure"
	"github.com/plumbref/plumb/internal/golden"
	// The generator spells package quant's words too (testdata/gen/fam_quant.py), for
	// its golden families, before any operation here takes them.
	_ "github.com/plumbref/plumb/quant"
)

// vocabularyFile is where the golden generator (testdata/gen/common.py)
// reads every convention's words, so that it writes and compares the
// words the Go side defines and no table of its own.
const vocabularyFile = "../testdata/gen/vocabulary.json"

// TestVocabularyFile: the generator's copy of the vocabulary is what the
// code defines. After adding or renaming a word, run
//
//	go test ./ops -run TestVocabularyFile -update
func TestVocabularyFile(t *testing.T) {
	var b bytes.Buffer
	b.WriteString("{\n  \"note\": \"written by go test ./ops -run TestVocabularyFile -update from the Go convention types; do not edit\",\n  \"conventions\": ")
	enc, err := json.MarshalIndent(Conventions(), "  ", "  ")
	ensure.NoError(t, err)
	b.Write(enc)
	b.WriteString("\n}\n")
	golden.WholeFile(t, vocabularyFile, b.String())
}
