package strict_test

import (
	"fmt"

	"github.com/leqnode/leqnode/node/lib/strict"
)

// A command whose keys differ in case from the schema's and whose time has a one-digit hour
// is refused, with every problem on one line.
func ExampleJSON() {
	var cmd struct {
		Action string `json:"action"`
		From   string `json:"from"`
	}
	err := strict.JSON([]byte(`{"ACtion":"resend","from":"2031-05-01T0:00:00Z"}`), &cmd)
	fmt.Println(err)
	_, err = strict.ParseTime(cmd.From)
	fmt.Println(err != nil)
	// Output:
	// ACtion: unknown key (keys are case-sensitive: write "action")
	// true
}

func ExampleParseTime() {
	t, err := strict.ParseTime("1996-12-19T16:39:57-08:00")
	fmt.Println(t.UTC(), err)
	_, err = strict.ParseTime("2031-05-01T0:00:00Z")
	fmt.Println(err)
	// Output:
	// 1996-12-20 00:39:57 +0000 UTC <nil>
	// "2031-05-01T0:00:00Z" is not an RFC 3339 time: write YYYY-MM-DDThh:mm:ssZ, e.g. 2031-05-04T07:00:00Z (two digits each for hour, minute and second)
}
