module phipsi

go 1.26.0

require (
	github.com/fogleman/gg v1.3.0
	github.com/golang/freetype v0.0.0-20170609003504-e2365dfdc4a0
	github.com/pelletier/go-toml/v2 v2.4.3
	github.com/spf13/pflag v1.1.0
	golang.org/x/image v0.48.0
	golang.org/x/term v0.48.0
	gonum.org/v1/gonum v0.17.0
)

require golang.org/x/sys v0.50.0
