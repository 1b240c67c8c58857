package main

import (
	"context"
	"flag"
	"log"
	"strings"

	"github.com/apache/beam/sdks/v2/go/pkg/beam"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/io/textio"
	_ "github.com/apache/beam/sdks/v2/go/pkg/beam/runners/prism"
	"github.com/apache/beam/sdks/v2/go/pkg/beam/x/beamx"
)

func main() {
	flag.Parse()
	beam.Init()
	p, s := beam.NewPipelineWithRoot()
	c := beam.Create(s, "a", "b", "c")
	u := beam.ParDo(s, strings.ToUpper, c)
	textio.Write(s, "/tmp/beamtry/out.txt", u)
	if err := beamx.Run(context.Background(), p); err != nil {
		log.Fatal(err)
	}
}
