// Package rulesexamples holds veer's library of example alert rules: text
// files in the rule-set format of veer/functions/rules (name [severity] =
// expression, # comments), embedded so that the command line and the
// server can offer them as starting points. README.md says what each file
// is for.
//
// A rule that fires prompts review by a licensed clinician under local
// occupational-health rules; it is not a diagnosis.
package rulesexamples
