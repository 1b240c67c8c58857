package sim

import (
	"fmt"
	"math/rand/v2"
	"strconv"
	"strings"
	"unicode"
	"unicode/utf8"

	"handoff"
)

// TextConfig sets the size of the invented river-care reports. Zero fields
// take the defaults shown.
type TextConfig struct {
	Reports    int // volunteer reports (default 600); each has 2–6 sentences, about 3.85 on average
	Sites      int // monitoring sites (default 24), spread over 6 invented rivers
	Volunteers int // volunteers who write the reports (default 60)
	FirstYear  int // first year of reports (default 2021)
	Years      int // number of years covered (default 5)
}

func (c TextConfig) withDefaults() TextConfig {
	if c.Reports == 0 {
		c.Reports = 600
	}
	if c.Sites == 0 {
		c.Sites = 24
	}
	if c.Volunteers == 0 {
		c.Volunteers = 60
	}
	if c.FirstYear == 0 {
		c.FirstYear = 2021
	}
	if c.Years == 0 {
		c.Years = 5
	}
	return c
}

// TextSet is the generated text scenario: one item per sentence, in report
// order, with the truth of both codebooks.
//
// Item IDs are "rep-NNNN-P" (report NNNN, 0-based position P); Parent is the
// report ID "rep-NNNN". Covariates: site (a site code such as "BRN-03"), river,
// year, season (winter, spring, summer, autumn), reporter (volunteer ID) and
// experience (new, regular, veteran; new volunteers misspell more).
type TextSet struct {
	Items   []handoff.Item
	Topic   map[string]string // item ID → true TopicCodebook key
	Urgency map[string]string // item ID → true UrgencyCodebook key
	// TopicTasks and UrgencyTasks are the same sentences as crowd tasks for
	// the two codebooks. Ambiguous sentences carry Alt and Ambiguity in
	// TopicTasks.
	TopicTasks   []Task
	UrgencyTasks []Task
}

// Topic class indices in TopicCodebook order.
const (
	tPol = iota
	tWild
	tBank
	tLit
	tOther
)

var topicKeys = []string{Pollution, Wildlife, BankDamage, Litter, Other}
var urgencyKeys = []string{UrgencyNone, UrgencyLow, UrgencyMedium, UrgencyHigh}

// template is one sentence pattern. Slots in braces are filled from vocab or,
// for the level slots, from the sentence's urgency.
type template struct {
	class int
	alt   int     // class the sentence may be read as, -1 none
	amb   float64 // chance a reader takes it as alt
	urg   [4]float64
	text  string
}

var templates = []template{
	// pollution
	{tPol, -1, 0, [4]float64{.05, .35, .35, .25}, "there was {amt} oily sheen on the water {near} the {structure}{tail}."},
	{tPol, -1, 0, [4]float64{.05, .4, .35, .2}, "the water smelled {smell} {near} the {structure}{tail}."},
	{tPol, -1, 0, [4]float64{.05, .4, .35, .2}, "{qty} grey foam had collected against the {structure}{tail}."},
	{tPol, -1, 0, [4]float64{.1, .4, .3, .2}, "the river was {colour} {near} the {structure}{tail}."},
	{tPol, -1, 0, [4]float64{0, .3, .45, .25}, "sewage fungus was growing on the stones {near} the {structure}{tail}."},
	{tPol, -1, 0, [4]float64{.25, .3, .25, .2}, "our {kit} gave {reading} {chem} readings{tail}."},
	{tPol, -1, 0, [4]float64{0, .25, .4, .35}, "something {discharging} from the {pipe} and the water around it was {colour}{tail}."},
	{tPol, -1, 0, [4]float64{.05, .4, .35, .2}, "we noticed {qty} scum along the edge of the {water}{tail}."},
	{tPol, -1, 0, [4]float64{.05, .3, .35, .3}, "a {sharp} chemical smell hung over the {water} {near} the {structure}{tail}."},
	// wildlife
	{tWild, -1, 0, [4]float64{.8, .2, 0, 0}, "we saw {count} {animals} {action} {near} the {structure}."},
	{tWild, -1, 0, [4]float64{.75, .2, .05, 0}, "a {bird} was nesting in the {bankplace}."},
	{tWild, -1, 0, [4]float64{.05, .35, .4, .2}, "{invasive} is spreading along the {bankside}{tail}."},
	{tWild, -1, 0, [4]float64{.85, .15, 0, 0}, "the kick sample had {count} {inverts}."},
	{tWild, -1, 0, [4]float64{.85, .15, 0, 0}, "there were {count} {fish} rising in the pool above the {structure}."},
	{tWild, -1, 0, [4]float64{0, .15, .4, .45}, "we found an injured {animal} on the {bankside}{tail}."},
	{tWild, -1, 0, [4]float64{.9, .1, 0, 0}, "fresh otter spraints were on the rocks {near} the {structure}."},
	{tWild, -1, 0, [4]float64{.9, .1, 0, 0}, "a {bird} was diving for {food} {near} the {structure}."},
	{tWild, -1, 0, [4]float64{.85, .15, 0, 0}, "we counted {number} {animals} between the {structure} and the {structure2}."},
	// bank damage
	{tBank, -1, 0, [4]float64{.05, .35, .4, .2}, "the bank is {eroding} {near} the {structure}{tail}."},
	{tBank, -1, 0, [4]float64{0, .25, .4, .35}, "{size} section of bank has slumped into the {water}{tail}."},
	{tBank, -1, 0, [4]float64{.05, .4, .4, .15}, "cattle have trampled the bank {near} the {structure}{tail}."},
	{tBank, -1, 0, [4]float64{.05, .35, .4, .2}, "a fallen {tree} is undercutting the {bankside}{tail}."},
	{tBank, -1, 0, [4]float64{.05, .4, .4, .15}, "the {defence} {near} the {structure} {broken}{tail}."},
	{tBank, -1, 0, [4]float64{0, .3, .4, .3}, "the footpath along the {bankside} is slipping into the river{tail}."},
	{tBank, -1, 0, [4]float64{.05, .35, .4, .2}, "bare soil is showing where the {bankside} gave way{tail}."},
	{tBank, -1, 0, [4]float64{.05, .45, .35, .15}, "the {bankside} has been poached by livestock{tail}."},
	// litter
	{tLit, -1, 0, [4]float64{.3, .55, .15, 0}, "we picked up {count} {items} {near} the {structure}."},
	{tLit, -1, 0, [4]float64{0, .3, .45, .25}, "someone has dumped {dumped} {near} the {structure}{tail}."},
	{tLit, -1, 0, [4]float64{.05, .45, .35, .15}, "there was {qty} plastic caught in the {snag}{tail}."},
	{tLit, -1, 0, [4]float64{.1, .5, .3, .1}, "fishing line was tangled in the {vegetation}{tail}."},
	{tLit, -1, 0, [4]float64{.05, .45, .35, .15}, "a {bigitem} was lying in the {water}{tail}."},
	{tLit, -1, 0, [4]float64{.05, .4, .4, .15}, "bags of rubbish had been left by the {structure}{tail}."},
	{tLit, -1, 0, [4]float64{.05, .45, .35, .15}, "{qty} litter had washed up on the gravel bar{tail}."},
	{tLit, -1, 0, [4]float64{.3, .5, .2, 0}, "we filled {number} bin bags with rubbish from the {bankside}."},
	// other
	{tOther, -1, 0, [4]float64{1, 0, 0, 0}, "the weather was {weather}."},
	{tOther, -1, 0, [4]float64{1, 0, 0, 0}, "{greeting}."},
	{tOther, -1, 0, [4]float64{.8, .2, 0, 0}, "access to the {structure} was {access}."},
	{tOther, -1, 0, [4]float64{.85, .15, 0, 0}, "the river level was {level} after the recent {rain}."},
	{tOther, -1, 0, [4]float64{.95, .05, 0, 0}, "we met {people} at the {structure}."},
	{tOther, -1, 0, [4]float64{.9, .1, 0, 0}, "i forgot the {kit} so there are no readings this time."},
	{tOther, -1, 0, [4]float64{1, 0, 0, 0}, "next visit is planned for {day}."},
	{tOther, -1, 0, [4]float64{1, 0, 0, 0}, "{count} volunteers came along {when}."},
	{tOther, -1, 0, [4]float64{1, 0, 0, 0}, "photos are in the shared folder as usual."},
}

// ambiguous sentences: the truth follows TopicCodebook's instructions, but
// readers often take them as the alternative.
var ambiguous = []template{
	{tWild, tPol, .4, [4]float64{0, .2, .45, .35}, "several dead fish were floating {near} the {structure}{tail}."},
	{tPol, tWild, .3, [4]float64{0, .1, .4, .5}, "dead fish were floating in the oily water below the {structure}{tail}."},
	{tPol, tLit, .4, [4]float64{0, .15, .4, .45}, "old oil drums had been dumped by the {structure} and one was leaking{tail}."},
	{tLit, tBank, .4, [4]float64{.05, .4, .4, .15}, "rubbish had piled up where the bank collapsed {near} the {structure}{tail}."},
	{tBank, tWild, .4, [4]float64{.05, .35, .4, .2}, "burrowing {burrower} have undermined the bank {near} the {structure}{tail}."},
	{tOther, tPol, .35, [4]float64{.6, .4, 0, 0}, "the water was low and looked a bit murky {near} the {structure}."},
	{tOther, tBank, .35, [4]float64{.6, .35, .05, 0}, "the path down to the {structure} was muddy and starting to slip."},
	{tPol, tLit, .45, [4]float64{.05, .4, .35, .2}, "there was {amt} foam and a few plastic bottles in the eddy {near} the {structure}{tail}."},
	{tLit, tWild, .4, [4]float64{.3, .5, .2, 0}, "ducks were feeding among the floating rubbish {near} the {structure}."},
}

var vocab = map[string][]string{
	"near":        {"near", "by", "just below", "just above", "next to", "downstream of", "upstream of", "around", "beside"},
	"structure":   {"outfall", "footbridge", "weir", "culvert", "road bridge", "old mill race", "ford", "confluence", "sluice gate", "car park", "stepping stones", "pumping station"},
	"structure2":  {"weir", "footbridge", "ford", "culvert", "road bridge", "bend", "island"},
	"water":       {"river", "channel", "pool", "backwater", "stream", "margin"},
	"smell":       {"of sewage", "like rotten eggs", "of diesel", "strongly of chemicals", "musty and sour", "of bleach"},
	"colour":      {"a murky brown colour", "milky white", "an odd orange tint", "cloudy grey", "a strange green", "dark and soupy"},
	"kit":         {"dip test", "test strips", "phosphate kit", "nitrate kit", "turbidity tube", "meter"},
	"chem":        {"phosphate", "nitrate", "ammonia", "turbidity", "conductivity"},
	"discharging": {"was pouring out", "was trickling out", "kept spilling out", "was gushing out", "was seeping out"},
	"pipe":        {"outfall pipe", "drain", "field drain", "storm overflow", "culvert mouth"},
	"sharp":       {"sharp", "strong", "sickly sweet", "acrid", "nasty"},
	"count":       {"two", "three", "a few", "several", "four", "a pair of", "five", "lots of"},
	"number":      {"3", "4", "6", "7", "9", "12", "15", "20", "23"},
	"animals":     {"kingfishers", "herons", "otters", "dippers", "grey wagtails", "water voles", "mallards", "damselflies", "moorhens", "swans"},
	"action":      {"feeding", "nesting", "hunting", "swimming", "resting", "flying low"},
	"bird":        {"dipper", "kingfisher", "moorhen", "wagtail", "sand martin", "coot"},
	"bankplace":   {"bank", "roots of the alder", "old wall", "reeds", "gap under the bridge"},
	"invasive":    {"balsam", "knotweed", "giant hogweed", "floating pennywort", "an invasive weed"},
	"bankside":    {"left bank", "right bank", "far bank", "bankside", "riverbank", "bank top"},
	"inverts":     {"mayfly nymphs", "caddis larvae", "freshwater shrimp", "stonefly nymphs", "snails"},
	"fish":        {"trout", "grayling", "minnows", "chub", "small fish"},
	"animal":      {"swan", "otter", "heron", "duck", "badger", "goose"},
	"food":        {"small fish", "insects", "minnows"},
	"eroding":     {}, // level slot
	"size":        {}, // level slot
	"tree":        {"willow", "alder", "ash", "oak", "sycamore"},
	"defence":     {"stone revetment", "fence", "gabion wall", "willow spiling", "wooden groyne"},
	"broken":      {"is washed out", "has come loose", "is leaning badly", "is broken in places", "has partly collapsed"},
	"items":       {"crisp packets", "plastic bottles", "drinks cans", "carrier bags", "takeaway boxes", "wet wipes", "coffee cups"},
	"dumped":      {"a mattress", "an old sofa", "builders' rubble", "a shopping trolley", "garden waste", "a fridge", "a pile of tyres"},
	"snag":        {"reeds", "tree roots", "overhanging branches", "debris dam", "willow roots"},
	"vegetation":  {"willows", "brambles", "reeds", "alders", "nettles"},
	"bigitem":     {"tyre", "traffic cone", "bicycle", "shopping trolley", "plastic chair", "pram"},
	"weather":     {"dry and bright", "cold and windy", "grey with light drizzle", "warm and sunny", "foggy at first", "showery"},
	"greeting":    {"another visit with the usual group", "first survey of the year", "quick visit today", "thanks to everyone who came along", "short report this time", "routine monthly check"},
	"access":      {"easy", "tricky after the rain", "blocked by a locked gate", "overgrown with nettles", "fine once we found the stile"},
	"level":       {"high", "low", "normal", "falling", "rising"},
	"rain":        {"rain", "dry spell", "storms", "snowmelt"},
	"people":      {"a dog walker", "two anglers", "the landowner", "a school group", "a couple of kayakers"},
	"day":         {"next saturday", "early next month", "the spring", "after the holidays", "two weeks from now"},
	"when":        {"this morning", "in the afternoon", "despite the rain", "for the first time", "today"},
	"burrower":    {"rabbits", "signal crayfish", "rats", "mink"},
}

// levelVocab holds slots whose wording follows the sentence's urgency.
var levelVocab = map[string][4][]string{
	"amt": {
		{"no real", "hardly any", "barely any"},
		{"a faint", "a little", "a trace of", "a small patch of", "a thin film of", "some"},
		{"a noticeable", "quite a lot of", "a fair amount of", "a wide band of", "plenty of"},
		{"a huge amount of", "masses of", "a thick layer of", "an alarming amount of", "loads of"},
	},
	"qty": {
		{"hardly any", "barely any", "no real"},
		{"a little", "a few bits of", "some", "a small amount of"},
		{"quite a lot of", "a fair amount of", "plenty of", "a good deal of"},
		{"masses of", "loads of", "a huge amount of", "an alarming amount of"},
	},
	"tail": {
		{"", "", " as on previous visits", " like last time"},
		{"", "", " but nothing to worry about yet", " so worth checking next time", ", only minor"},
		{"", " and it should be reported this week", " and it looks worse than last month", ", which is a concern"},
		{"", " and it needs someone out today", " and it is spreading fast", " - please act urgently", " and it is getting worse by the hour", ", really serious"},
	},
	"reading": {
		{"normal", "the usual", "low"},
		{"slightly raised", "a bit high", "borderline"},
		{"high", "clearly raised", "worrying"},
		{"very high", "off the scale", "extreme"},
	},
	"eroding": {
		{"stable again", "holding up"},
		{"slightly eroded", "a little worn"},
		{"badly eroded", "undercut"},
		{"eroding away fast", "collapsing"},
	},
	"size": {
		{"a tiny", "a very small"},
		{"a small", "a narrow"},
		{"a two metre", "a sizeable"},
		{"a huge", "a ten metre", "a whole"},
	},
}

var rivers = []struct{ name, code string }{
	{"Brannock", "BRN"}, {"Ellowen", "ELW"}, {"Quillfar", "QLF"},
	{"Tessary", "TSY"}, {"Marrowburn", "MRB"}, {"Caddle Water", "CDW"},
}

var landmarks = []string{
	"Mill Reach", "Hollin Ford", "Sallow Bridge", "Crake Weir", "Dunnet Pool",
	"Fenwary Meadow", "Stannel Culvert", "Pellow Bend", "Gorsey Flats", "Whinmoor Sluice",
	"Tarrock Island", "Lindel Steps",
}

var fillers = []string{"also ", "again ", "as before, ", "i think ", "honestly ", "btw ", "on the way back ", "unfortunately ", "just to say ", "fyi "}

var seasons = []string{"winter", "winter", "spring", "spring", "spring", "summer", "summer", "summer", "autumn", "autumn", "autumn", "winter"}

// base prevalence of the topic classes in report bodies.
var topicBase = []float64{.2, .25, .17, .2, .18}

type site struct {
	code, river, name string
	profile           []float64 // topic weights for the report's main topic
}

type volunteer struct {
	id         string
	experience string
	misspell   float64 // per long word
	filler     float64 // per sentence
}

// GenerateText writes the invented river-care reports and splits them into
// sentence items. Deterministic given cfg and seed.
//
// Each report belongs to a site and a volunteer and has a main topic drawn
// from the site's profile; its sentences are, in turn, an opening remark
// (class other, probability 0.25), body sentences (the main topic with
// probability 0.55, an ambiguous sentence with probability 0.12, otherwise a
// class drawn from the base prevalence 0.20/0.25/0.17/0.20/0.18) and, in
// reports of three or more sentences, a closing remark (other, probability
// 0.2). A sentence's true urgency is drawn from its pattern's distribution,
// and the amount words and closing phrases are drawn for that urgency, with
// probability 0.15 from a neighbouring level instead.
func GenerateText(cfg TextConfig, seed uint64) (*TextSet, error) {
	cfg = cfg.withDefaults()
	if cfg.Reports < 0 || cfg.Sites < 1 || cfg.Volunteers < 1 || cfg.Years < 1 {
		return nil, fmt.Errorf("sim: text config: reports %d, sites %d, volunteers %d, years %d must be positive", cfg.Reports, cfg.Sites, cfg.Volunteers, cfg.Years)
	}
	r := newRand(seed, 0x7e47)

	sites := make([]site, cfg.Sites)
	for i := range sites {
		rv := rivers[i%len(rivers)]
		prof := make([]float64, len(topicBase))
		for j, b := range topicBase {
			prof[j] = b * lognormal(r, 1, 0.6)
		}
		sites[i] = site{
			code:    fmt.Sprintf("%s-%02d", rv.code, i/len(rivers)+1),
			river:   rv.name,
			name:    landmarks[r.IntN(len(landmarks))],
			profile: prof,
		}
	}
	vols := make([]volunteer, cfg.Volunteers)
	for i := range vols {
		v := volunteer{id: fmt.Sprintf("v%03d", i+1)}
		switch categorical(r, []float64{.3, .45, .25}) {
		case 0:
			v.experience, v.misspell, v.filler = "new", 0.05, 0.25
		case 1:
			v.experience, v.misspell, v.filler = "regular", 0.02, 0.15
		default:
			v.experience, v.misspell, v.filler = "veteran", 0.008, 0.08
		}
		vols[i] = v
	}
	volWeight := make([]float64, len(vols))
	for i := range volWeight {
		volWeight[i] = lognormal(r, 1, 0.7)
	}

	byClass := make([][]int, len(topicKeys))
	for i, t := range templates {
		byClass[t.class] = append(byClass[t.class], i)
	}

	ts := &TextSet{Topic: map[string]string{}, Urgency: map[string]string{}}
	for rep := 0; rep < cfg.Reports; rep++ {
		st := sites[r.IntN(len(sites))]
		vol := vols[categorical(r, volWeight)]
		year := cfg.FirstYear + r.IntN(cfg.Years)
		month := r.IntN(12)
		main := categorical(r, st.profile)
		n := 2 + categorical(r, []float64{.15, .25, .3, .2, .1})
		parent := fmt.Sprintf("rep-%04d", rep+1)
		for pos := 0; pos < n; pos++ {
			var t template
			switch {
			case pos == 0 && r.Float64() < .25:
				t = templates[pick(r, byClass[tOther])]
			case pos == n-1 && pos > 1 && r.Float64() < .2:
				t = templates[pick(r, byClass[tOther])]
			default:
				u := r.Float64()
				switch {
				case u < .55:
					t = templates[pick(r, byClass[main])]
				case u < .67:
					t = pick(r, ambiguous)
				default:
					t = templates[pick(r, byClass[categorical(r, topicBase)])]
				}
			}
			level := categorical(r, t.urg[:])
			text := fill(r, t.text, level, vol)
			id := fmt.Sprintf("%s-%d", parent, pos)
			it := handoff.Item{
				ID: id, Kind: handoff.KindText, Text: text, Parent: parent, Position: pos,
				Covariates: map[string]string{
					"site":       st.code,
					"site_name":  st.name + " (" + st.river + ")",
					"river":      st.river,
					"year":       strconv.Itoa(year),
					"season":     seasons[month],
					"reporter":   vol.id,
					"experience": vol.experience,
				},
			}
			ts.Items = append(ts.Items, it)
			ts.Topic[id] = topicKeys[t.class]
			ts.Urgency[id] = urgencyKeys[level]
			task := Task{Item: id, Truth: topicKeys[t.class]}
			if t.alt >= 0 {
				task.Alt, task.Ambiguity = topicKeys[t.alt], t.amb
			}
			ts.TopicTasks = append(ts.TopicTasks, task)
			ts.UrgencyTasks = append(ts.UrgencyTasks, Task{Item: id, Truth: urgencyKeys[level]})
		}
	}
	return ts, nil
}

// fill expands a template for the given urgency level and adds a volunteer's
// noise: filler openings, misspellings, lost capitals or full stops.
func fill(r *rand.Rand, tpl string, level int, v volunteer) string {
	var b strings.Builder
	for {
		i := strings.IndexByte(tpl, '{')
		if i < 0 {
			b.WriteString(tpl)
			break
		}
		j := strings.IndexByte(tpl[i:], '}') + i
		b.WriteString(tpl[:i])
		slot := tpl[i+1 : j]
		tpl = tpl[j+1:]
		if lv, ok := levelVocab[slot]; ok {
			l := level
			if r.Float64() < .15 {
				if l == 0 || (l < 3 && r.IntN(2) == 0) {
					l++
				} else {
					l--
				}
			}
			b.WriteString(pick(r, lv[l]))
			continue
		}
		if v.experience == "veteran" && slot == "near" && r.Float64() < .3 {
			b.WriteString(pick(r, []string{"u/s of", "d/s of"}))
			continue
		}
		words := vocab[slot]
		if len(words) == 0 {
			panic("sim: template slot without words: " + slot)
		}
		b.WriteString(pick(r, words))
	}
	s := b.String()
	if r.Float64() < v.filler {
		s = pick(r, fillers) + s
	}
	s = misspell(r, s, v.misspell)
	if level == 3 && strings.HasSuffix(s, ".") && r.Float64() < .2 {
		s = strings.TrimSuffix(s, ".") + "!!"
	}
	if r.Float64() < .04 && strings.HasSuffix(s, ".") {
		s = strings.TrimSuffix(s, ".")
	}
	if r.Float64() < .93 {
		first, size := utf8.DecodeRuneInString(s)
		s = string(unicode.ToUpper(first)) + s[size:]
	}
	return s
}

// misspell changes each word of five or more letters with probability rate:
// two neighbouring letters swapped, a letter dropped or a letter doubled.
func misspell(r *rand.Rand, s string, rate float64) string {
	words := strings.Split(s, " ")
	for i, w := range words {
		if len(w) < 5 || !isLetters(w) || r.Float64() >= rate {
			continue
		}
		k := 1 + r.IntN(len(w)-2)
		switch r.IntN(3) {
		case 0:
			w = w[:k] + string(w[k+1]) + string(w[k]) + w[k+2:]
		case 1:
			w = w[:k] + w[k+1:]
		default:
			w = w[:k] + string(w[k]) + w[k:]
		}
		words[i] = w
	}
	return strings.Join(words, " ")
}

func isLetters(w string) bool {
	for i := 0; i < len(w); i++ {
		if w[i] < 'a' || w[i] > 'z' {
			return false
		}
	}
	return true
}
