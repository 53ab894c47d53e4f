// Package calc builds veer's LibreOffice Calc extension (veer.oxt) from the
// function catalogue, so Calc's VEER.* functions, their parameters and their
// Function Wizard help are never a second list kept by hand.
//
// The extension is a Python UNO component (veer_calc.py, embedded here as a
// template) implementing com.sun.star.sheet.XAddIn and a generated IDL
// interface, org.veer.calc.XFunctions, with one method per catalogue
// function. Build generates the IDL, CalcAddIns.xcu (function and parameter
// help), the component registration, description.xml and
// META-INF/manifest.xml, compiles the IDL to a type library with the
// LibreOffice SDK's unoidl-write and zips everything into the .oxt.
// Nothing generated is committed: the tests build the extension afresh.
//
// Names: the add-in's service name is "veer" and a function VEER.X is the
// method "x" (lower case), so the programmatic name Calc stores in .ods files,
// service.method in upper case, is VEER.X, the same as the display name the
// user types. Workbooks written with of:=VEER.X(...) therefore open with
// working formulas.
//
// Argument types: a range parameter is sequence<sequence<any>> (Calc passes
// the cells; a blank cell arrives as empty text and is sent as null), a
// required number is double, a required text is string, and every optional
// parameter is any, so it can be left out (Calc passes void, sent as null).
// Functions with a value result return any; column and table results return
// sequence<sequence<any>>, which Calc spills into an array formula.
//
// Results: numbers, texts and blanks as they are; TRUE/FALSE as 1/0,
// because Calc 7.4 cannot read a UNO boolean in an add-in's result.
//
// Errors: the component returns Calc error values (#N/A, #VALUE!, #NUM!,
// #REF!, #NAME?, #DIV/0!, #NULL!) coded the way Calc codes them, a NaN with
// the error number in its low bits. Calc cannot show a message in a cell, so
// the messages are kept and shown by the extension's own VEER.ERRORS().
// A server that is not running or does not answer gives #N/A at once (the
// connection is refused, or times out after one second). Calc itself gives
// Err:504 without calling the add-in when an argument is missing or an
// input range or array holds error cells (IFERROR(range; "") turns them into
// blanks).
//
// The same component also implements XCompatibilityNames, so .xlsx
// workbooks holding VEER.X formulas open in Calc with working formulas.
//
// A signal is a prompt for review by a licensed clinician under local
// occupational-health rules, not a diagnosis.
package calc
