package web

import (
	"errors"
	"fmt"
	"math"
	"net/http"
	"net/url"
	"strconv"
	"strings"

	"plumb/cmd/plumb/internal/view"
)

// The calibration answers from a model's current fit:
//
//	GET /api/v1/models/{name}/predict?at=emf_mv=10[&at=...][&level=0.95][&readings=1]
//	GET /api/v1/models/{name}/inverse?reading=150[&reading=...][&level=0.95][&readings=1]
//
// at takes a value for every predictor column, "a=1,b=2" for several;
// readings is the number of new readings averaged into one value. The
// answer is view.Answers: {"model", "fit_id", "response", "units",
// "predictions" | "inverse", "caution"}, undefined numbers null.

// maxQuestions bounds the points or readings of one request.
const maxQuestions = 100

func (s *server) apiPredict(w http.ResponseWriter, r *http.Request) {
	s.answer(w, r, func(q *view.Question, v url.Values) error {
		ats := v["at"]
		if len(ats) == 0 {
			return &badRequest{"at: give at least one point, at=COLUMN=VALUE[,COLUMN=VALUE...]"}
		}
		for _, a := range ats {
			pt := map[string]float64{}
			for _, kv := range strings.Split(a, ",") {
				k, val, ok := strings.Cut(kv, "=")
				k = strings.TrimSpace(k)
				if !ok || k == "" {
					return &badRequest{fmt.Sprintf("at %q: want COLUMN=VALUE[,COLUMN=VALUE...]", a)}
				}
				x, err := finite(val)
				if err != nil {
					return &badRequest{fmt.Sprintf("at %q: %s: %v", a, k, err)}
				}
				if _, dup := pt[k]; dup {
					return &badRequest{fmt.Sprintf("at %q: %s given twice", a, k)}
				}
				pt[k] = x
			}
			q.At = append(q.At, pt)
		}
		return nil
	})
}

func (s *server) apiInverse(w http.ResponseWriter, r *http.Request) {
	s.answer(w, r, func(q *view.Question, v url.Values) error {
		rs := v["reading"]
		if len(rs) == 0 {
			return &badRequest{"reading: give at least one reading to invert, reading=VALUE"}
		}
		for _, s := range rs {
			y, err := finite(s)
			if err != nil {
				return &badRequest{fmt.Sprintf("reading: %v", err)}
			}
			q.Readings = append(q.Readings, y)
		}
		return nil
	})
}

// answer reads level and readings, lets parse read the rest, and asks
// the Source.
func (s *server) answer(w http.ResponseWriter, r *http.Request, parse func(*view.Question, url.Values) error) {
	src, ok := s.src.(view.Answerer)
	if !ok {
		s.fail(w, r, http.StatusNotFound, errors.New("this server does not answer predictions"))
		return
	}
	v := r.URL.Query()
	var q view.Question
	err := parse(&q, v)
	if err == nil && len(q.At)+len(q.Readings) > maxQuestions {
		err = &badRequest{fmt.Sprintf("at most %d points or readings a request", maxQuestions)}
	}
	if err == nil && v.Get("level") != "" {
		q.Level, err = finite(v.Get("level"))
		if err != nil || !(q.Level > 0 && q.Level < 1) {
			err = &badRequest{fmt.Sprintf("level %q: want a number strictly between 0 and 1", v.Get("level"))}
		}
	}
	if err == nil && v.Get("readings") != "" {
		q.Averaged, err = strconv.Atoi(v.Get("readings"))
		if err != nil || q.Averaged < 1 || q.Averaged > 1000 {
			err = &badRequest{fmt.Sprintf("readings %q: want the number of readings averaged, 1 to 1000", v.Get("readings"))}
		}
	}
	if err != nil {
		s.fail(w, r, http.StatusBadRequest, err)
		return
	}
	ctx, cancel := s.ctx(r)
	defer cancel()
	ans, err := src.Answer(ctx, r.PathValue("name"), q)
	if err != nil {
		status := statusOf(err)
		if errors.Is(err, view.ErrQuestion) {
			status = http.StatusBadRequest
		}
		s.fail(w, r, status, err)
		return
	}
	writeJSON(w, http.StatusOK, ans)
}

func finite(s string) (float64, error) {
	x, err := strconv.ParseFloat(strings.TrimSpace(s), 64)
	if err != nil || math.IsNaN(x) || math.IsInf(x, 0) {
		return 0, fmt.Errorf("%q is not a finite number", s)
	}
	return x, nil
}
