package linear

// For the external tests (uci_test.go), which import the model package
// and so cannot live inside this one.
type (
	SkRequest = skRequest
	SkAnswer  = skAnswer
)

var RunSklearn = runSklearn
