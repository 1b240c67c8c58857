// Package web holds the service's pages, embedded in the binary: the
// sign-in page, the labelling page and the project board, with their script
// and style sheet. They are plain HTML, CSS and JavaScript; nothing is
// fetched from elsewhere at run time. Item text is always put on the page
// with textContent, never parsed as HTML.
package web

import "embed"

// FS holds the files under static/: signin.html, label.html, board.html and
// their assets. Package api serves the pages at /signin, /label and /board
// and the assets under /static/.
//
//go:embed static
var FS embed.FS
