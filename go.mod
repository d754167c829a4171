module github.com/leqnode/leqnode

go 1.26

require (
	go.etcd.io/bbolt v1.5.0 // indirect
	golang.org/x/sys v0.45.0 // indirect
	golang.org/x/tools v0.36.0 // indirect
	gonum.org/v1/gonum v0.17.0
)
