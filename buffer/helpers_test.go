package buffer

import "github.com/leqnode/leqnode/buffer/record/recordtest"

// t0 is the time the store's tests start at: that of the record model's sample records.
var t0 = recordtest.T0
