//go:build tools

// Package deps pins the third-party modules the project builds on, so that
// `go mod tidy` keeps them while the packages that use them are being written.
package deps

import (
	_ "github.com/chromedp/chromedp"
	_ "github.com/clipperhouse/uax29/v2/sentences"
	_ "github.com/clipperhouse/uax29/v2/words"
	_ "github.com/kljensen/snowball"
	_ "github.com/labstack/echo/v4"
	_ "github.com/parquet-go/parquet-go"
	_ "github.com/prometheus/client_golang/prometheus"
	_ "github.com/schollz/progressbar/v3"
	_ "github.com/spf13/cobra"
	_ "go.etcd.io/bbolt"
	_ "go.yaml.in/yaml/v3"
	_ "golang.org/x/crypto/argon2"
	_ "golang.org/x/image/draw"
	_ "gonum.org/v1/gonum/optimize"
	_ "gonum.org/v1/plot"
)
