package store

// Exported for the tests of package store_test.
var (
	MarkListSQL   = func(p MarkListParams) (string, []any) { return markListSQL(p, nil) }
	MarkPageSQL   = markPageSQL
	BoundingBoxes = boundingBoxes
	NearestSQL    = nearestSQL
	HeightColumns = heightColumns
	HeightFrom    = heightFrom
	// ChainVersionsSQL is HeightChainRows' query of a chunk's whole chains.
	ChainVersionsSQL = chainVersions + chainOrder
)
