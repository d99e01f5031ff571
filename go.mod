module bandfold

go 1.26.0

require (
	github.com/airbusgeo/godal v0.0.18
	github.com/spf13/cobra v1.10.2
	github.com/spf13/pflag v1.0.9
	gonum.org/v1/gonum v0.17.0
)

require (
	github.com/inconshreveable/mousetrap v1.1.0 // indirect
	golang.org/x/sync v0.25.0 // indirect
)
