package sim

import (
	"encoding/json"
	"io"

	"handoff"
)

// Class keys of the topic codebook (TopicCodebook), in codebook order.
const (
	Pollution  = "pollution"
	Wildlife   = "wildlife"
	BankDamage = "bank-damage"
	Litter     = "litter"
	Other      = "other"
)

// Class keys of the urgency codebook (UrgencyCodebook), lowest first.
const (
	UrgencyNone   = "none"
	UrgencyLow    = "low"
	UrgencyMedium = "medium"
	UrgencyHigh   = "high"
)

// Class keys of the particle codebook (ParticleCodebook), in codebook order.
const (
	Cell   = "cell"
	Chain  = "chain"
	Rod    = "rod"
	Debris = "debris"
)

// TopicCodebook returns the nominal codebook for the sentences of the
// invented river-care reports: pollution, wildlife, bank-damage, litter, other.
func TopicCodebook() handoff.Codebook {
	return handoff.Codebook{
		Name:     "river-topic",
		Question: "What is this sentence of a volunteer's river report mainly about?",
		Scale:    handoff.Nominal,
		Classes: []handoff.Class{
			{Key: Pollution, Name: "Pollution", Description: "Something in the water that is not solid rubbish: oil or sheen, foam, sewage, odd colour or smell, a discharge from a pipe, high readings from a water test."},
			{Key: Wildlife, Name: "Wildlife", Description: "Animals and plants: sightings of birds, fish, mammals or insects, nests, invasive plants, injured or dead animals when no spill is mentioned."},
			{Key: BankDamage, Name: "Bank damage", Description: "Damage to the banks or channel: erosion, collapse, trampling by livestock, fallen trees undercutting the bank, broken fences or bank defences."},
			{Key: Litter, Name: "Litter", Description: "Solid rubbish in or beside the river: plastic, cans, bags, tyres, dumped furniture or drums, fishing line."},
			{Key: Other, Name: "Other", Description: "Anything else: weather, water level, access, who came, equipment, plans for the next visit."},
		},
		Instructions: "Read one sentence at a time and choose the class that says what the sentence mainly reports. " +
			"If a sentence mentions two things, choose the one it is about. " +
			"Dead fish or animals in oily, foamy or discoloured water are pollution; dead fish with no sign of a spill are wildlife. " +
			"Rubbish lying on a collapsed bank is litter; a bank undermined by burrowing animals is bank damage. " +
			"Leaking drums or containers that were dumped are pollution. Muddy paths and high or low water are other.",
	}
}

// UrgencyCodebook returns the ordinal codebook for how soon a sentence's
// report needs action: none < low < medium < high.
func UrgencyCodebook() handoff.Codebook {
	return handoff.Codebook{
		Name:     "river-urgency",
		Question: "How urgently does what this sentence reports need someone to act?",
		Scale:    handoff.Ordinal,
		Classes: []handoff.Class{
			{Key: UrgencyNone, Name: "None", Description: "Nothing to act on: a note about the visit, a normal sighting."},
			{Key: UrgencyLow, Name: "Low", Description: "Worth noting; check again on the next visit."},
			{Key: UrgencyMedium, Name: "Medium", Description: "Should be reported to the programme this week."},
			{Key: UrgencyHigh, Name: "High", Description: "Needs action today: a spreading spill, a large collapse, an animal in distress."},
		},
		Instructions: "Judge the sentence alone. Words about amount and spread (a trace, a lot, masses, spreading) and explicit calls for action matter most. " +
			"When unsure between two neighbouring levels, choose the lower one.",
	}
}

// ParticleCodebook returns the nominal codebook for the synthetic microscope
// images: cell, chain, rod, debris.
func ParticleCodebook() handoff.Codebook {
	return handoff.Codebook{
		Name:     "water-sample-particles",
		Question: "What particle is in the middle of this microscope image of a water sample?",
		Scale:    handoff.Nominal,
		Classes: []handoff.Class{
			{Key: Cell, Name: "Round cell", Description: "A single round or slightly oval cell."},
			{Key: Chain, Name: "Chain of cells", Description: "Three or more round cells joined in a line, like beads on a string."},
			{Key: Rod, Name: "Rod", Description: "One elongated cell with smooth sides and rounded ends."},
			{Key: Debris, Name: "Debris", Description: "Anything irregular: mineral grains, plant fragments, clumps."},
		},
		Instructions: "Look at the particle nearest the centre and ignore small specks. " +
			"A chain shows a bead-like outline with narrow waists between cells; a rod has straight, smooth sides. " +
			"At low magnification look closely for the waists before choosing rod.",
	}
}

// CombinedCodebook returns one nominal codebook holding the topic classes
// followed by the particle classes, for a single project that holds both the
// report sentences and the sample images. The instructions say which classes
// apply to which kind of item.
func CombinedCodebook() handoff.Codebook {
	t, p := TopicCodebook(), ParticleCodebook()
	classes := append(append([]handoff.Class{}, t.Classes...), p.Classes...)
	return handoff.Codebook{
		Name:     "river-care",
		Question: "For a report sentence: what is it mainly about? For a sample image: what particle is in the middle?",
		Scale:    handoff.Nominal,
		Classes:  classes,
		Instructions: "Sentences take one of pollution, wildlife, bank-damage, litter, other. " + t.Instructions +
			" Images take one of cell, chain, rod, debris. " + p.Instructions,
	}
}

// WriteCodebook writes cb as indented JSON to w. JSON is also valid YAML, so
// the file may be named .json or .yaml.
func WriteCodebook(w io.Writer, cb handoff.Codebook) error {
	enc := json.NewEncoder(w)
	enc.SetIndent("", "  ")
	return enc.Encode(cb)
}
