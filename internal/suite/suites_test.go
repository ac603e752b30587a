package suite_test

import (
	"testing"

	"github.com/plumbref/plumb/attention/attentiontest"
	"github.com/plumbref/plumb/ffn/ffntest"
	"github.com/plumbref/plumb/internal/suite"
	"github.com/plumbref/plumb/norm/normtest"
	"github.com/plumbref/plumb/posenc/posenctest"
	"github.com/plumbref/plumb/quant/quanttest"
)

// The package documentation of every suite lists each of its cases, with
// its reason (see DocListsEveryCase).
func TestSuitesDocumentTheirCases(t *testing.T) {
	suite.DocListsEveryCase(t, "../../attention/attentiontest/doc.go", attentiontest.Cases(), func(c attentiontest.Case) (string, string) { return c.Name, c.Why })
	suite.DocListsEveryCase(t, "../../attention/attentiontest/doc.go", attentiontest.PagedCases(), func(c attentiontest.PagedCase) (string, string) { return c.Name, c.Why })
	suite.DocListsEveryCase(t, "../../attention/attentiontest/doc.go", attentiontest.RingCases(), func(c attentiontest.RingCase) (string, string) { return c.Name, c.Why })
	suite.DocListsEveryCase(t, "../../attention/attentiontest/doc.go", attentiontest.SplitCases(), func(c attentiontest.SplitCase) (string, string) { return c.Name, c.Why })
	suite.DocListsEveryCase(t, "../../attention/attentiontest/doc.go", attentiontest.PackedCases(), func(c attentiontest.PackedCase) (string, string) { return c.Name, c.Why })
	suite.DocListsEveryCase(t, "../../ffn/ffntest/ffntest.go", ffntest.Cases(), func(c ffntest.Case) (string, string) { return c.Name, c.Why })
	suite.DocListsEveryCase(t, "../../norm/normtest/normtest.go", normtest.Cases(), func(c normtest.Case) (string, string) { return c.Name, c.Why })
	suite.DocListsEveryCase(t, "../../posenc/posenctest/posenctest.go", posenctest.Cases(), func(c posenctest.Case) (string, string) { return c.Name, c.Why })
	suite.DocListsEveryCase(t, "../../quant/quanttest/doc.go", quanttest.Cases(), func(c quanttest.Case) (string, string) { return c.Name, c.Why })
	suite.DocListsEveryCase(t, "../../quant/quanttest/doc.go", quanttest.FP8Cases(), func(c quanttest.FP8Case) (string, string) { return c.Name, c.Why })
	suite.DocListsEveryCase(t, "../../quant/quanttest/doc.go", quanttest.MXCases(), func(c quanttest.MXCase) (string, string) { return c.Name, c.Why })
}
