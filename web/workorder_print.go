package web

import (
	"net/http"
)

// printPage is one work order set out for paper: the cautions first, the
// lines with room to write what was found, and the sign-off.
type printPage struct {
	*workOrderPage
	// Checks are the safety steps of DESIGN.md section 7 as boxes to tick
	// before work starts; Caution is health.SafetyCaution in full.
	Checks []string
	// Printed is when the sheet was printed.
	Printed string
}

// safetyChecks are the cautions of health.SafetyCaution (DESIGN.md
// section 7), one step a line, so the trade can tick each before touching
// the drive; the sheet prints the caution in full above them.
var safetyChecks = []string{
	"The supply is isolated and locked out.",
	"The discharge time the drive maker states has passed.",
	"Zero voltage on the DC bus is verified with a rated meter.",
	"The work follows the drive maker's manual, local electrical codes and licensed practice.",
}

// printWorkOrder shows a work order in a printable page without the
// navigation.
func (h *Handler) printWorkOrder(w http.ResponseWriter, r *http.Request) {
	id, ok := pathID(r)
	if !ok {
		h.errorPage(w, r, http.StatusNotFound, "There is no such work order.")
		return
	}
	p, err := h.loadWorkOrder(r, id)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	pp := printPage{workOrderPage: p, Checks: safetyChecks, Printed: datetime(p.Now)}
	h.renderFrame(w, r, http.StatusOK, "workorder_print", "printframe", h.printCSSPath, orderHeading(p.Order)+" (print)", "workorders", pp)
}
