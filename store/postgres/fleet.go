package postgres

import (
	"context"
	"fmt"

	"github.com/jackc/pgx/v5"
	"github.com/jackc/pgx/v5/pgtype"

	"plumb/store"
)

// FleetModel is one model of the shared history as the fleet view shows
// it, whichever daemon runs it.
type FleetModel struct {
	Model string
	// State is the model's recorded state (zero when none was recorded).
	State store.ModelState
	// Rows and Quarantined count the model's observations and quarantined
	// rows; Fits its fits.
	Rows, Quarantined, Fits int64
	// LastFit is the newest fit (nil when there is none).
	LastFit *store.FitRecord
	// OpenAlerts and AcknowledgedAlerts count the model's alerts in those
	// states.
	OpenAlerts, AcknowledgedAlerts int64
	// Owner is the model's recorded owner (nil when no daemon ever owned
	// it through Acquire), with whether it is alive.
	Owner *Ownership
}

// fleetQuery reads every model's summary in one statement: each part is
// an index lookup per model (sources by (model_id, path), fits_model
// backwards, alerts_subject), so its cost grows with the number of
// models, not with their histories (apart from counting fits, which
// counts index entries). The server's lock table is read once.
const fleetQuery = `WITH names AS (SELECT name COLLATE "C" AS name FROM models UNION SELECT model FROM model_states
	UNION SELECT model FROM model_owners),
held AS MATERIALIZED (SELECT pid, (classid::bigint << 32) | objid::bigint AS lock_key FROM pg_locks
	WHERE locktype = 'advisory' AND granted AND objsubid = 1
	AND database = (SELECT oid FROM pg_database WHERE datname = current_database()))
SELECT n.name, st.state, st.reason, st.at,
	COALESCE(src.rows, 0), COALESCE(src.quar, 0), COALESCE(fc.n, 0),
	lf.id, lf.at, lf.n, lf.p, lf.terms, lf.estimates, lf.std_errors, lf.sigma, lf.r_squared, lf.fragility,
	lf.fragility_k, lf.detail, lf.last_obs_id,
	COALESCE(al.open, 0), COALESCE(al.ack, 0),
	o.host, o.pid, o.label, o.since,
	EXISTS (SELECT 1 FROM held h WHERE h.pid = o.backend_pid AND h.lock_key = o.lock_key)
FROM names n
LEFT JOIN models m ON m.name = n.name
LEFT JOIN model_states st ON st.model = n.name
LEFT JOIN LATERAL (SELECT SUM(rows_total)::bigint AS rows, SUM(quarantined)::bigint AS quar FROM sources WHERE model_id = m.id) src ON true
LEFT JOIN LATERAL (SELECT COUNT(*) AS n FROM fits WHERE model_id = m.id) fc ON true
LEFT JOIN LATERAL (SELECT * FROM fits WHERE model_id = m.id ORDER BY id DESC LIMIT 1) lf ON true
LEFT JOIN LATERAL (SELECT COUNT(*) FILTER (WHERE state = 'open') AS open, COUNT(*) FILTER (WHERE state = 'acknowledged') AS ack
	FROM alerts WHERE model = n.name) al ON true
LEFT JOIN model_owners o ON o.model = n.name
ORDER BY n.name`

// Fleet returns every model of the shared history (every daemon's), by
// name, with its state, counts, newest fit, open alerts and owner, in one
// query: the fleet view of a daemon reads it rather than asking model by
// model.
func (db *DB) Fleet(ctx context.Context) ([]FleetModel, error) {
	rows, err := db.pool.Query(ctx, fleetQuery)
	if err != nil {
		return nil, fmt.Errorf("store: fleet: %w", err)
	}
	out, err := pgx.CollectRows(rows, func(r pgx.CollectableRow) (FleetModel, error) {
		var (
			fm                     FleetModel
			state, reason          pgtype.Text
			stAt, fitAt, since     pgtype.Int8
			fitID, fitN, lastObs   pgtype.Int8
			fitP, frag, fragK, pid pgtype.Int4
			terms                  []string
			est, se                []byte
			sigma, r2              pgtype.Float8
			detail, host, label    pgtype.Text
			alive                  bool
		)
		if err := r.Scan(&fm.Model, &state, &reason, &stAt, &fm.Rows, &fm.Quarantined, &fm.Fits,
			&fitID, &fitAt, &fitN, &fitP, &terms, &est, &se, &sigma, &r2, &frag, &fragK, &detail, &lastObs,
			&fm.OpenAlerts, &fm.AcknowledgedAlerts, &host, &pid, &label, &since, &alive); err != nil {
			return fm, err
		}
		if state.Valid {
			fm.State = store.ModelState{Model: fm.Model, State: state.String, Reason: reason.String, At: decTime(stAt)}
		}
		if fitID.Valid {
			f := &store.FitRecord{ID: fitID.Int64, Model: fm.Model, At: decTime(fitAt), N: int(fitN.Int64), P: int(fitP.Int32),
				Terms: terms, Sigma: sigma.Float64, RSquared: r2.Float64, Fragility: int(frag.Int32),
				FragilityK: int(fragK.Int32), Detail: detail.String, LastObsID: lastObs.Int64}
			var err error
			if f.Estimates, err = decFloats(est); err != nil {
				return fm, err
			}
			if f.StdErrors, err = decFloats(se); err != nil {
				return fm, err
			}
			fm.LastFit = f
		}
		if host.Valid {
			fm.Owner = &Ownership{Model: fm.Model, Owner: Owner{Host: host.String, PID: int(pid.Int32), Label: label.String},
				Since: decTime(since), Alive: alive}
		}
		return fm, nil
	})
	if err != nil {
		return nil, fmt.Errorf("store: fleet: %w", err)
	}
	return out, nil
}
