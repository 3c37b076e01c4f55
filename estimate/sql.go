package estimate

import "splitsmith/internal/sqlfn"

// SQL returns the SQL functions this package declares (see DEVELOPERS.md).
func SQL() sqlfn.Set {
	return sqlfn.Set{Package: "estimate"}
}
