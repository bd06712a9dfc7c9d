package state

// Phase is where a rule stands for one series in the alert lifecycle.
type Phase uint8

// Phases of the alert lifecycle.
const (
	Quiet   Phase = iota // nothing projected
	Pending              // projected, not yet confirmed
	Open                 // incident opened and not resolved
	Closing              // open, projection no longer holds, not yet confirmed resolved
)

// Incident is the alert memory of one rule on one series. It lives in the
// series so that it is snapshotted and restored with the statistics; the
// lifecycle logic that drives it is in package forecast.
type Incident struct {
	Rule     uint16   // index of the rule in the rule set
	Phase    Phase    //
	ID       [16]byte // incident id (UUID bytes), stable while open
	Since    int64    // unix ms: when the current phase began
	Emitted  int64    // unix ms: last event published
	Prob     float32  // probability in the last published event
	ETA      int64    // unix ms: eta in the last published event
	Opened   int64    // unix ms: when the incident opened
	Threshed int64    // unix ms: first time the projection held in this episode
}

// Published remembers the last forecast record sent for a series, so the
// publisher can skip records that carry no news.
type Published struct {
	At    int64   // unix ms
	Mean  float32 // mean at the horizon
	Upper float32 // upper 95 % bound at the horizon
	Lower float32 // lower 95 % bound at the horizon
}

// Memo is what the pipeline remembers about a series between evaluations.
type Memo struct {
	Evaluated int64  // unix ms: origin of the last evaluation
	Rules     uint64 // bitmask of the rules whose selector matches the series
	RulesSet  bool   // Rules has been computed
	Published Published
	Cycle     CycleMemo
	Calib     Calibration
}

// CycleMemo caches the cycle detection of a series, which package forecast
// runs at most once per new hourly bucket.
type CycleMemo struct {
	At      int64   // unix ms: end of the newest hourly bucket detection saw; 0 before the first
	Period  int32   // seconds; 0 when no cycle was found
	Period2 int32   // seconds of a second, longer cycle; 0 when none
	ACF     float32 // autocorrelation at Period
}

// Calibration keeps the bands of a series honest: scale factors for each
// side of the bands, adjusted online from how past forecasts fared
// against what then happened, and the forecasts still waiting for their
// actual values. Package forecast maintains it and says what each scale
// means.
type Calibration struct {
	Scale [6]float32 // 0 counts as 1
	Due   [2]int64   // unix ms when a pending check's actual is due; 0 for none
	Mean  [2]float32 // the checked forecast's mean
	SD    [2]float32 // and its standard deviation
	Seen  uint32     // checks scored so far
}
