package store

// Exported for the tests of package store_test.
var (
	MarkListSQL   = markListSQL
	MarkPageSQL   = markPageSQL
	BoundingBoxes = boundingBoxes
)
