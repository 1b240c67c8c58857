package api

import (
	"net/http"
	"sort"

	"github.com/labstack/echo/v4"

	"handoff"
)

// trainingSet is the gold items shown before real work: first the training
// items (the expected answer is shown after each answer), then the quiz
// (answers never shown; only the score).
type trainingSet struct {
	train, quiz []handoff.Gold
}

func (t trainingSet) all() []handoff.Gold {
	return append(append([]handoff.Gold(nil), t.train...), t.quiz...)
}

func (t trainingSet) off() bool { return len(t.train)+len(t.quiz) == 0 }

// trainingItems splits the gold items, in item-id order, into Config.Training
// training items and Config.Quiz quiz items; with too little gold, the quiz
// gets what is left after training, and with fewer than Training+1 gold
// items half (rounded down) are training and the rest quiz.
//
// The split is cached until gold is imported again (forgetTraining).
func (sv *Server) trainingItems() (trainingSet, error) {
	sv.trMu.Lock()
	defer sv.trMu.Unlock()
	if sv.trSet != nil {
		return *sv.trSet, nil
	}
	gold, err := sv.st.Gold()
	if err != nil {
		return trainingSet{}, err
	}
	sort.Slice(gold, func(i, j int) bool { return gold[i].Item < gold[j].Item })
	t, q := sv.cfg.Training, sv.cfg.Quiz
	n := len(gold)
	if t+q == 0 || n == 0 {
		sv.trSet = &trainingSet{}
		return *sv.trSet, nil
	}
	if n < t+q {
		if q > 0 && n <= t {
			t = n / 2
		}
		t = min(t, n)
		q = min(q, n-t)
	}
	ts := trainingSet{train: gold[:t], quiz: gold[t : t+q]}
	sv.trSet = &ts
	return ts, nil
}

func (sv *Server) forgetTraining() {
	sv.trMu.Lock()
	sv.trSet = nil
	sv.trMu.Unlock()
}

// TrainingView is where a person stands in the training and the quiz.
//
// State is "off" (the project has no training), "training", "quiz",
// "passed" or "failed" (the last quiz attempt scored below the pass mark;
// POST /api/v1/training/restart starts again). Item is the item to answer
// in the states "training" and "quiz".
type TrainingView struct {
	State       string    `json:"state"`
	Step        int       `json:"step"`
	Steps       int       `json:"steps"`
	QuizStep    int       `json:"quiz_step"`
	QuizSteps   int       `json:"quiz_steps"`
	QuizCorrect int       `json:"quiz_correct,omitempty"`
	PassMark    float64   `json:"pass_mark"`
	Attempts    int       `json:"attempts"`
	Item        *ItemView `json:"item,omitempty"`
}

func (sv *Server) trainingView(person string) (TrainingView, error) {
	ts, err := sv.trainingItems()
	if err != nil {
		return TrainingView{}, err
	}
	p, err := sv.auth.person(person)
	if err != nil {
		return TrainingView{}, err
	}
	tr := p.Training
	v := TrainingView{Step: tr.Step, Steps: len(ts.train), QuizStep: tr.QuizAnswered, QuizSteps: len(ts.quiz),
		PassMark: sv.cfg.PassMark, Attempts: tr.Attempts}
	var g *handoff.Gold
	switch {
	case ts.off():
		v.State = "off"
	case tr.Passed:
		v.State = "passed"
	case tr.Step < len(ts.train):
		v.State = "training"
		g = &ts.train[tr.Step]
	case tr.QuizAnswered < len(ts.quiz):
		v.State = "quiz"
		g = &ts.quiz[tr.QuizAnswered]
	default:
		v.State = "failed"
		v.QuizCorrect = tr.QuizCorrect
	}
	if g != nil {
		it, _, err := sv.st.Item(g.Item)
		if err != nil {
			return TrainingView{}, err
		}
		iv := itemView(it)
		v.Item = &iv
	}
	return v, nil
}

// trainingDone reports whether a person may get real work.
func (sv *Server) trainingDone(person string) (bool, error) {
	p, err := sv.auth.person(person)
	if err != nil {
		return false, err
	}
	if p.Training.Passed {
		return true, nil
	}
	ts, err := sv.trainingItems()
	if err != nil {
		return false, err
	}
	return ts.off(), nil
}

func (sv *Server) getTraining(c echo.Context) error {
	v, err := sv.trainingView(who(c).ID)
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, v)
}

// TrainingAnswer is the body of POST /api/v1/training/answers.
type TrainingAnswer struct {
	Item  string `json:"item"`
	Label string `json:"label"`
}

// TrainingFeedback answers a training or quiz answer. Expected is given for
// training items only; quiz answers get no feedback until the end.
type TrainingFeedback struct {
	Correct  *bool          `json:"correct,omitempty"`
	Expected *handoff.Class `json:"expected,omitempty"`
	Next     TrainingView   `json:"next"`
}

func (sv *Server) postTrainingAnswer(c echo.Context) error {
	pr := who(c)
	var req TrainingAnswer
	if err := decodeJSON(c, &req); err != nil {
		return err
	}
	cb := sv.st.Codebook()
	ci, ok := cb.Index(req.Label)
	if !ok {
		return jsonError(http.StatusUnprocessableEntity, "field \"label\": %q is not a class of the codebook", req.Label)
	}
	cur, err := sv.trainingView(pr.ID)
	if err != nil {
		return err
	}
	if cur.Item == nil || cur.Item.ID != req.Item {
		return jsonError(http.StatusConflict, "answer the item the training shows now (GET /api/v1/training); state is %q", cur.State)
	}
	ts, err := sv.trainingItems()
	if err != nil {
		return err
	}
	var fb TrainingFeedback
	_, err = sv.auth.updatePerson(pr.ID, sv.source(c), func(p *Person) {
		tr := &p.Training
		if cur.State == "training" {
			g := ts.train[tr.Step]
			correct := g.Class == req.Label
			fb.Correct = &correct
			if gi, ok := cb.Index(g.Class); ok {
				cl := cb.Classes[gi]
				fb.Expected = &cl
			}
			tr.Step++
			return
		}
		g := ts.quiz[tr.QuizAnswered]
		if g.Class == cb.Classes[ci].Key {
			tr.QuizCorrect++
		}
		tr.QuizAnswered++
		if tr.QuizAnswered == len(ts.quiz) {
			tr.Attempts++
			tr.Passed = float64(tr.QuizCorrect) >= sv.cfg.PassMark*float64(len(ts.quiz))-1e-9
		}
	})
	if err != nil {
		return err
	}
	fb.Next, err = sv.trainingView(pr.ID)
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, fb)
}

func (sv *Server) postTrainingRestart(c echo.Context) error {
	pr := who(c)
	cur, err := sv.trainingView(pr.ID)
	if err != nil {
		return err
	}
	if cur.State != "failed" {
		return jsonError(http.StatusConflict, "only a failed quiz can be restarted; state is %q", cur.State)
	}
	if _, err := sv.auth.updatePerson(pr.ID, sv.source(c), func(p *Person) {
		p.Training.Step, p.Training.QuizAnswered, p.Training.QuizCorrect = 0, 0, 0
	}); err != nil {
		return err
	}
	v, err := sv.trainingView(pr.ID)
	if err != nil {
		return err
	}
	return c.JSON(http.StatusOK, v)
}
