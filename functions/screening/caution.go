package screening

// Caution is the screening-aid statement. Every text veer shows about
// signals carries it, word for word: the command line, the cell functions'
// help, the add-ins, reports and workbooks. Texts that Go code cannot reach
// (the add-ins' static pages) are checked against it by tests.
const Caution = "A signal is a prompt for review by a licensed clinician under local occupational-health rules, not a diagnosis."
