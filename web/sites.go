package web

import (
	"encoding/json"
	"fmt"
	"net/http"
	"strconv"

	"kelvard/health"
	"kelvard/store"
)

// sitesPage lists the sites and their areas with counts.
type sitesPage struct {
	Sites []siteSummary
}

type siteSummary struct {
	Site  store.Site
	Areas []areaSummary
}

type areaSummary struct {
	Area      store.Area
	Positions int64
	Bands     []choiceCount
}

func (h *Handler) sites(w http.ResponseWriter, r *http.Request) {
	ctx := r.Context()
	places, err := h.st.Places(ctx)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	counts, err := h.st.AreaCounts(ctx)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	var p sitesPage
	for _, sp := range places {
		ss := siteSummary{Site: sp.Site}
		for _, a := range sp.Areas {
			as := areaSummary{Area: a}
			if c := counts[a.ID]; c != nil {
				as.Positions = c.Positions
				for _, b := range health.Bands() {
					if n := c.Bands[b]; n > 0 {
						as.Bands = append(as.Bands, choiceCount{Key: string(b), Label: bandLabel(b), N: n,
							Link: fmt.Sprintf("/fleet?area=%d&band=%s", a.ID, b)})
					}
				}
			}
			ss.Areas = append(ss.Areas, as)
		}
		p.Sites = append(p.Sites, ss)
	}
	h.render(w, r, http.StatusOK, "sites", "Sites", "sites", p)
}

// sitePage shows one site: every area's environment profile and the
// enclosure verdict of every position in it.
type sitePage struct {
	Site  store.Site
	Areas []areaView
}

type areaView struct {
	Area      store.Area
	Positions []positionVerdict
}

// positionVerdict is a position with the enclosure report of the drive
// standing in it (nil when empty or not yet assessed).
type positionVerdict struct {
	store.PositionVerdict
	Report          *health.EnclosureReport
	Worst           health.Verdict
	WorstSeverity   health.Severity
	HasFindingCheck bool
}

func (h *Handler) site(w http.ResponseWriter, r *http.Request) {
	id, err := strconv.ParseInt(r.PathValue("id"), 10, 64)
	if err != nil || id <= 0 {
		h.errorPage(w, r, http.StatusNotFound, "There is no such site.")
		return
	}
	v, err := h.st.Site(r.Context(), id)
	if err != nil {
		h.fail(w, r, err)
		return
	}
	p := sitePage{Site: v.Site}
	at := map[int64]int{}
	for i, a := range v.Areas {
		p.Areas = append(p.Areas, areaView{Area: a})
		at[a.ID] = i
	}
	for _, pv := range v.Positions {
		i, ok := at[pv.Position.AreaID]
		if !ok {
			continue
		}
		out := positionVerdict{PositionVerdict: pv}
		if len(pv.Enclosure) > 0 {
			var rep health.EnclosureReport
			if err := json.Unmarshal(pv.Enclosure, &rep); err != nil {
				h.serverError(w, r, fmt.Errorf("enclosure report of position %d: %w", pv.Position.ID, err))
				return
			}
			out.Report = &rep
			out.Worst, out.WorstSeverity = rep.Worst()
		}
		p.Areas[i].Positions = append(p.Areas[i].Positions, out)
	}
	h.render(w, r, http.StatusOK, "site", v.Site.Name, "sites", p)
}
