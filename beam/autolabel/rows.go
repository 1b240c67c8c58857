package autolabel

import (
	"encoding/json"
	"maps"
	"slices"
)

// Label is one machine label written by the pipeline: the item's id, the
// most probable class, its calibrated probability and the model version.
// It is the row of the labels-*.jsonl and labels-*.parquet shards.
type Label struct {
	Item       string  `json:"item" parquet:"item"`
	Class      string  `json:"class" parquet:"class"`
	Confidence float64 `json:"confidence" parquet:"confidence"`
	Model      string  `json:"model" parquet:"model"`
}

// ForPeople is one item scored below the threshold, sent back to people: the
// item as read (id, kind, text or path, parent, position, covariates) with
// the machine's best guess beside it. It is the row of the
// people-*.jsonl and people-*.parquet shards.
//
// Its JSON form is an item record as `loop items add` reads it (id, text or
// path, parent, position, covariates as top-level fields) plus the fields
// machine_class, machine_confidence and model.
type ForPeople struct {
	ID         string            `parquet:"id"`
	Kind       string            `parquet:"kind"`
	Text       string            `parquet:"text"`
	Path       string            `parquet:"path"`
	Parent     string            `parquet:"parent"`
	Position   int64             `parquet:"position"`
	Covariates map[string]string `parquet:"covariates"`
	Class      string            `parquet:"machine_class"`
	Confidence float64           `parquet:"machine_confidence"`
	Model      string            `parquet:"model"`
}

// MarshalJSON writes the item record with the machine's guess; covariates
// become top-level fields (a covariate named like one of the fixed fields is
// left out rather than overwrite it).
func (p ForPeople) MarshalJSON() ([]byte, error) {
	m := make(map[string]any, 8+len(p.Covariates))
	for _, k := range slices.Sorted(maps.Keys(p.Covariates)) {
		m[k] = p.Covariates[k]
	}
	m["id"] = p.ID
	m["kind"] = p.Kind
	if p.Text != "" {
		m["text"] = p.Text
	}
	if p.Path != "" {
		m["path"] = p.Path
	}
	if p.Parent != "" {
		m["parent"] = p.Parent
	}
	if p.Position != 0 {
		m["position"] = p.Position
	}
	m["machine_class"] = p.Class
	m["machine_confidence"] = p.Confidence
	m["model"] = p.Model
	return json.Marshal(m) // encoding/json sorts map keys: stable output
}

// labelRows and peopleRows carry one batch's rows for one shard between
// the scoring step and the shard writers, so the runner moves one element
// per batch and shard rather than one per item.
type labelRows struct {
	Rows []Label
}

type peopleRows struct {
	Rows []ForPeople
}
