package scpi

import (
	"context"
	"fmt"
	"math"
	"strconv"
	"strings"
	"time"

	"goniod/sim"
)

// Handler executes command lines on a simulated instrument. It is used by one goroutine at a time (the
// server's executor); the instrument itself may be halted from another.
type Handler struct {
	inst     *sim.Instrument
	errs     errorQueue
	decimals int // digits after the point of an angle: enough for one motor step
}

// axisWords are the protocol's names of the simulator's axes, as SCPI character data (short form in capitals).
var axisWords = []struct{ word, axis string }{
	{"THETa", sim.AxisTheta},
	{"TTHeta", sim.AxisTwoTheta},
}

// NewHandler returns a handler for inst.
func NewHandler(inst *sim.Instrument) *Handler {
	step := 0.001
	if axes := inst.Describe().Axes; len(axes) > 0 && axes[0].ResolutionDeg > 0 {
		step = axes[0].ResolutionDeg
	}
	return &Handler{inst: inst, decimals: min(max(int(math.Ceil(-math.Log10(step)-1e-9)), 0), 9)}
}

// spec is one command of the protocol.
type spec struct {
	pattern            string
	query              bool
	minParam, maxParam int
	run                func(h *Handler, ctx context.Context, p []string) (string, error)
	nodes              []node
}

// Maximum gate of one count, seconds of instrument time.
const maxGateS = 86400

var commands = compile([]spec{
	{pattern: "*IDN", query: true, run: (*Handler).identify},
	{pattern: "*RST", run: (*Handler).reset},
	{pattern: "*CLS", run: (*Handler).clearErrors},
	{pattern: "SYSTem:ERRor[:NEXT]", query: true, run: (*Handler).nextError},
	{pattern: "SYSTem:KEEPalive", run: (*Handler).ok},
	{pattern: "SYSTem:WATChdog", query: true, run: (*Handler).watchdog},
	{pattern: "SYSTem:ECHO", query: true, minParam: 1, maxParam: 1, run: (*Handler).echo},
	{pattern: "SYSTem:DESCribe", query: true, run: (*Handler).describe},
	{pattern: "HALT", run: (*Handler).halt},
	{pattern: "ABORt", run: (*Handler).ok},
	{pattern: "MOVE", minParam: 2, maxParam: 2 * len(axisWords), run: (*Handler).move},
	{pattern: "POSition", query: true, minParam: 1, maxParam: 1, run: (*Handler).position},
	{pattern: "COUNt", query: true, minParam: 1, maxParam: 1, run: (*Handler).count},
	{pattern: "SOURce:TUBE", minParam: 2, maxParam: 2, run: (*Handler).setTube},
	{pattern: "SOURce:TUBE", query: true, run: (*Handler).tube},
	{pattern: "SOURce:HVOLtage", minParam: 1, maxParam: 1, run: (*Handler).setHighVoltage},
	{pattern: "SOURce:HVOLtage", query: true, run: (*Handler).highVoltage},
	{pattern: "INTerlock", query: true, run: (*Handler).interlock},
	{pattern: "SAFEty", query: true, run: (*Handler).safety},
})

func compile(specs []spec) []spec {
	for i := range specs {
		specs[i].nodes = compilePattern(specs[i].pattern)
	}
	return specs
}

// lookup finds the command a parsed line names and checks its parameter count.
func lookup(cmd Command) (*spec, error) {
	for i := range commands {
		s := &commands[i]
		if s.query != cmd.Query || !matchHeader(s.nodes, cmd.Header) {
			continue
		}
		switch {
		case len(cmd.Params) < s.minParam:
			return nil, errorf(codeMissingParam, "%s needs %d parameter(s)", s.pattern, s.minParam)
		case len(cmd.Params) > s.maxParam && s.maxParam == 0:
			return nil, errorf(codeParamNotAllowed, "%s takes no parameters", s.pattern)
		case len(cmd.Params) > s.maxParam:
			return nil, errorf(codeParamNotAllowed, "%s takes at most %d parameter(s)", s.pattern, s.maxParam)
		}
		return s, nil
	}
	h := strings.Join(cmd.Header, ":")
	if cmd.Query {
		h += "?"
	}
	return nil, errorf(codeUndefinedHeader, "%s", h)
}

// Execute runs one command line and returns its reply line (without terminator). A failed command is
// answered "ERR code,"text"" and its error is also queued for SYSTem:ERRor?. Every command counts as host
// activity for the watchdog.
func (h *Handler) Execute(ctx context.Context, line string) string {
	_ = h.inst.Feed(ctx)
	reply, err := h.run(ctx, line)
	if err != nil {
		return h.fail(asError(err))
	}
	return reply
}

// fail queues e and returns its reply line.
func (h *Handler) fail(e *Error) string {
	h.errs.push(e)
	return errorReply(e)
}

func (h *Handler) run(ctx context.Context, line string) (string, error) {
	cmd, err := Parse(line)
	if err != nil {
		return "", err
	}
	s, err := lookup(cmd)
	if err != nil {
		return "", err
	}
	return s.run(h, ctx, cmd.Params)
}

// immediate reports whether a line is a command the instrument acts on as soon as it arrives, before the
// command in progress ends: HALT or ABORt.
func immediate(line string) (halt, abort bool) {
	cmd, err := Parse(line)
	if err != nil || cmd.Query || len(cmd.Params) > 0 || len(cmd.Header) != 1 {
		return false, false
	}
	return cmd.Header[0] == "HALT", cmd.Header[0] == "ABOR" || cmd.Header[0] == "ABORT"
}

func (h *Handler) ok(context.Context, []string) (string, error) { return "OK", nil }

func (h *Handler) identify(ctx context.Context, _ []string) (string, error) {
	return h.inst.Identify(ctx)
}

// reset is *RST: high voltage off, motion and counting stopped; the tube setting and error queue stay.
func (h *Handler) reset(context.Context, []string) (string, error) { return "OK", h.inst.Halt() }

func (h *Handler) halt(context.Context, []string) (string, error) { return "OK", h.inst.Halt() }

func (h *Handler) clearErrors(context.Context, []string) (string, error) {
	h.errs.clear()
	return "OK", nil
}

func (h *Handler) nextError(context.Context, []string) (string, error) {
	e := h.errs.pop()
	return fmt.Sprintf("%d,%s", e.Code, quote(e.Error())), nil
}

func (h *Handler) watchdog(context.Context, []string) (string, error) {
	return formatFixed(max(h.inst.WatchdogTime(), 0).Seconds(), 3), nil
}

func (h *Handler) echo(_ context.Context, p []string) (string, error) { return p[0], nil }

// describe is anode, crystal, d-spacing (nm), rated kV, mA and W, dead time (s), paralyzable (0/1).
func (h *Handler) describe(context.Context, []string) (string, error) {
	d := h.inst.Describe()
	return strings.Join([]string{d.Anode, d.Crystal, formatFixed(d.CrystalSpacingNM, 6),
		formatFixed(d.MaxKV, 3), formatFixed(d.MaxMA, 3), formatFixed(d.MaxPowerW, 3),
		strconv.FormatFloat(d.DeadTime.Seconds(), 'g', -1, 64), bit(d.DeadTimeParalyzable)}, ","), nil
}

// axisOf maps character data to the simulator's axis name.
func axisOf(p string) (string, error) {
	for _, a := range axisWords {
		if matchWord(a.word, p) {
			return a.axis, nil
		}
	}
	return "", errorf(codeIllegalValue, "unknown axis %q (THETa, TTHeta)", p)
}

// move is MOVE axis,deg[,axis,deg]: all named axes move together; the reply is their read-back angles in
// the order given, once they have arrived.
func (h *Handler) move(ctx context.Context, p []string) (string, error) {
	if len(p)%2 != 0 {
		return "", errorf(codeMissingParam, "MOVE takes axis,angle pairs")
	}
	target := map[string]float64{}
	order := make([]string, 0, len(p)/2)
	for i := 0; i < len(p); i += 2 {
		axis, err := axisOf(p[i])
		if err != nil {
			return "", err
		}
		if _, dup := target[axis]; dup {
			return "", errorf(codeIllegalValue, "axis %s named twice", p[i])
		}
		deg, err := number(p[i+1])
		if err != nil {
			return "", err
		}
		target[axis] = deg
		order = append(order, axis)
	}
	got, err := h.inst.MoveAll(ctx, target)
	if err != nil {
		return "", err
	}
	out := make([]string, len(order))
	for i, axis := range order {
		out[i] = formatFixed(got[axis], h.decimals)
	}
	return strings.Join(out, ","), nil
}

func (h *Handler) position(ctx context.Context, p []string) (string, error) {
	axis, err := axisOf(p[0])
	if err != nil {
		return "", err
	}
	deg, err := h.inst.Position(ctx, axis)
	if err != nil {
		return "", err
	}
	return formatFixed(deg, h.decimals), nil
}

// count is COUNt? gate: counts for gate seconds and replies with the counts of each channel.
func (h *Handler) count(ctx context.Context, p []string) (string, error) {
	g, err := number(p[0])
	if err != nil {
		return "", err
	}
	if g < 0 || g > maxGateS {
		return "", errorf(codeOutOfRange, "gate %s s outside [0, %d] s", p[0], maxGateS)
	}
	c, err := h.inst.Count(ctx, time.Duration(math.Round(g*1e9)))
	if err != nil {
		return "", err
	}
	out := make([]string, len(c.Channels))
	for i, n := range c.Channels {
		out[i] = strconv.FormatUint(n, 10)
	}
	return strings.Join(out, ","), nil
}

func (h *Handler) setTube(ctx context.Context, p []string) (string, error) {
	kv, err := number(p[0])
	if err != nil {
		return "", err
	}
	ma, err := number(p[1])
	if err != nil {
		return "", err
	}
	return "OK", h.inst.SetSource(ctx, kv, ma)
}

func (h *Handler) tube(ctx context.Context, _ []string) (string, error) {
	s, err := h.inst.SourceState(ctx)
	if err != nil {
		return "", err
	}
	return formatFixed(s.KV, 3) + "," + formatFixed(s.MA, 3) + "," + bit(s.HighVoltage), nil
}

func (h *Handler) setHighVoltage(ctx context.Context, p []string) (string, error) {
	on, err := boolean(p[0])
	if err != nil {
		return "", err
	}
	return "OK", h.inst.SetHighVoltage(ctx, on)
}

func (h *Handler) highVoltage(ctx context.Context, _ []string) (string, error) {
	s, err := h.inst.SourceState(ctx)
	if err != nil {
		return "", err
	}
	return bit(s.HighVoltage), nil
}

func (h *Handler) interlock(ctx context.Context, _ []string) (string, error) {
	closed, err := h.inst.InterlockClosed(ctx)
	return bit(closed), err
}

// safety is high voltage and interlock in one reply: "hv,closed".
func (h *Handler) safety(ctx context.Context, _ []string) (string, error) {
	s, err := h.inst.Status(ctx)
	if err != nil {
		return "", err
	}
	return bit(s.HighVoltage) + "," + bit(s.InterlockClosed), nil
}

func bit(b bool) string {
	if b {
		return "1"
	}
	return "0"
}
