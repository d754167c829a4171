module github.com/leqnode/leqnode

go 1.26.0

require gonum.org/v1/gonum v0.17.0

require (
	codeberg.org/go-fonts/liberation v0.5.0 // indirect
	codeberg.org/go-latex/latex v0.2.0 // indirect
	codeberg.org/go-pdf/fpdf v0.11.1 // indirect
	git.sr.ht/~sbinet/gg v0.7.0 // indirect
	github.com/ajstarks/svgo v0.0.0-20211024235047-1546f124cd8b // indirect
	github.com/eclipse/paho.mqtt.golang v1.5.1 // indirect
	github.com/golang/freetype v0.0.0-20170609003504-e2365dfdc4a0 // indirect
	github.com/gordonklaus/portaudio v0.0.0-20250206071425-98a94950218b // indirect
	github.com/gorilla/websocket v1.5.3 // indirect
	github.com/mochi-mqtt/server/v2 v2.7.9 // indirect
	github.com/pelletier/go-toml/v2 v2.4.3 // indirect
	github.com/rs/xid v1.4.0 // indirect
	github.com/santhosh-tekuri/jsonschema/v6 v6.0.3 // indirect
	go.etcd.io/bbolt v1.5.0 // indirect
	golang.org/x/image v0.30.0 // indirect
	golang.org/x/net v0.44.0 // indirect
	golang.org/x/sync v0.20.0 // indirect
	golang.org/x/sys v0.50.0 // indirect
	golang.org/x/text v0.29.0 // indirect
	golang.org/x/tools v0.36.0 // indirect
	gonum.org/v1/plot v0.17.0 // indirect
	gopkg.in/yaml.v3 v3.0.1 // indirect
)
