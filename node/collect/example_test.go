package collect_test

import (
	"fmt"

	"github.com/leqnode/leqnode/node/collect"
)

// A collector configuration for the invented town of Wendle Cross: defaults fill every key the
// file leaves out.
func ExampleParseConfig() {
	cfg, err := collect.ParseConfig([]byte(`version = 1
[broker]
urls = ["ssl://broker.wendle-cross.invalid:8883"]
client_id = "wendle-collector-1"
[database]
url = "postgres://leqnode@db.wendle-cross.invalid:5432/leqnode?sslmode=verify-full"
password_file = "/etc/leqnode/collector-db-password"
`), "collector.toml")
	if err != nil {
		fmt.Println(err)
		return
	}
	fmt.Println(cfg.Broker.ShareGroup, cfg.Batch.MaxMessages, cfg.Resend.Grace)
	// Output: leqnode-collectors 1000 10m0s
}
