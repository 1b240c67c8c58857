package api

import (
	"net/http"

	"github.com/labstack/echo/v4"

	"handoff/round"
)

// SettingView is one of the project's round settings as the board shows it
// before running a round: the value a round would use, where it comes from
// ("stored" or "default"), its range and what it does.
type SettingView struct {
	Key    string `json:"key"`
	Value  string `json:"value"`
	Source string `json:"source"`
	Range  string `json:"range"`
	Doc    string `json:"doc"`
}

// SettingsReply is GET /api/v1/settings: the settings a round started here
// would use (the same as `loop config DIR` shows and `loop round` uses),
// what it would find new since the last round, and the round job.
type SettingsReply struct {
	Settings []SettingView `json:"settings"`
	Pending  round.Pending `json:"pending"`
	Round    RoundJob      `json:"round_job"`
}

func (sv *Server) getSettings(c echo.Context) error {
	_, list, err := round.Settings(sv.st)
	if err != nil {
		return err
	}
	keys := round.Keys()
	out := SettingsReply{Settings: make([]SettingView, 0, len(list)), Round: sv.rounds.job()}
	for i, x := range list {
		v := SettingView{Key: x.Key, Value: x.Value, Source: x.Source}
		if i < len(keys) && keys[i].Name == x.Key {
			v.Range, v.Doc = keys[i].Want, keys[i].Doc
		}
		out.Settings = append(out.Settings, v)
	}
	if out.Pending, err = round.PendingWork(sv.st); err != nil {
		return err
	}
	return c.JSON(http.StatusOK, out)
}
