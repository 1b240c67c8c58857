// Package sim generates invented scenarios and simulated crowds for demos,
// planning and tests. Nothing in it is real data: the rivers, sites, reports,
// microscope slides and annotators are all made up by this package, and every
// figure it produces is for demonstrating and checking the tool, never for a
// finding.
//
// The scenarios:
//
//   - Text (GenerateText): volunteer reports from a fictional river-care
//     programme, grouped by monitoring site and split into sentences. Each
//     sentence is an item whose parent is its report. Sentences are classed by
//     topic (TopicCodebook: pollution, wildlife, bank-damage, litter, other)
//     and carry a true urgency (UrgencyCodebook, ordinal: none, low, medium,
//     high) that is correlated with, but not fixed by, their wording.
//   - Images (RenderImages): synthetic microscope-style particle images
//     (ParticleCodebook: cell, chain, rod, debris) rendered as PNG files at
//     several magnifications. At low magnification the beads of a chain blur
//     into one another, so chains look like rods; the simulated crowd
//     confuses chain → rod far more at low magnification, and the same way
//     for everybody (ImageBias), so averaging cannot remove it. The true class
//     mix is the same at every magnification, so a correction that takes one
//     magnification as the reference stratum is valid.
//   - A simulated crowd (NewCrowd, Crowd.Answer): careful, average and
//     careless annotators, spammers (random or always one class) and
//     resubmitters (who label the same items many times), each with a
//     confusion matrix of their own drawn around their type's accuracy.
//   - A stream crowd (NewStream, Stream.Answer): the crowd a real project
//     gets — people arrive, give 10–70 labels each and leave, with spammers,
//     one-class annotators, a few resubmitters and confusions most of them
//     share (Shared). Use it to test anything that must hold on real crowds.
//   - Planning (CrowdSpec): a crowd described by shares of annotator types,
//     labels per item, classes and prevalence, generated with known truth.
//   - The demo (NewDemo): the text and image scenarios with one crowd that has
//     labelled most items, gold answers for a few, and an Answer method that
//     lets later rounds have the crowd answer each next batch.
//
// Everything is deterministic given the seed (math/rand/v2 PCG): the same
// configuration and seed give byte-identical items, images and labels; a
// different seed gives different ones. Crowd.Answer is deterministic given the
// seed, the round and the labels already asked for each item.
//
// Size: about 2,600 lines, because the invented scenario draws both its
// texts and its images, and its crowds (careful, careless, spammers, shared
// confusions, sparse streams) are what the demo, the planning and many tests
// run on.
package sim
