package api

import (
	_ "embed"
	"net/http"

	"github.com/labstack/echo/v4"
)

// openAPI is the OpenAPI 3 description of /api/v1, written by hand; a test
// checks that it names exactly the routes the server answers.
//
//go:embed openapi.json
var openAPI []byte

func (sv *Server) getOpenAPI(c echo.Context) error {
	c.Response().Header().Set("Cache-Control", "max-age=300")
	return c.Blob(http.StatusOK, "application/json", openAPI)
}
