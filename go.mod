module github.com/leqnode/leqnode

go 1.26
