package api

import (
	"net/http"

	"github.com/labstack/echo/v4"
)

// getWaves lists the crowd waves (store.Waves).
func (sv *Server) getWaves(c echo.Context) error {
	ws, err := sv.st.Waves()
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, map[string]any{"waves": ws})
}

// postWave opens the next crowd wave (store.OpenWave): labels people send
// from now on belong to it, and a person may label again an item they
// labelled in an earlier wave. Which items a wave covers is the next
// batch's business, as before.
func (sv *Server) postWave(c echo.Context) error {
	w, err := sv.st.OpenWave(sv.source(c))
	if err != nil {
		return err
	}
	ws, err := sv.st.Waves()
	if err != nil {
		return err
	}
	return c.JSON(http.StatusCreated, map[string]any{"opened": w, "waves": ws})
}
