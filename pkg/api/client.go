package api

import (
	"bytes"
	"context"
	"encoding/json"
	"fmt"
	"io"
	"net/http"
	"net/url"
	"strings"
	"time"

	"sluice/pkg/baseline"
	"sluice/pkg/model"
)

// Client talks to a running aggregator's API. Every operator command uses
// it; it adds nothing to what the server answers.
type Client struct {
	base string
	http *http.Client
}

// NewClient returns a client of the aggregator at base (e.g.
// "http://127.0.0.1:9713").
func NewClient(base string) *Client {
	return &Client{base: strings.TrimRight(base, "/"), http: &http.Client{}}
}

// Base is the aggregator's base URL.
func (c *Client) Base() string { return c.base }

// Jobs lists the tracked jobs, running ones only if running.
func (c *Client) Jobs(ctx context.Context, running bool) ([]model.Summary, error) {
	q := url.Values{}
	if running {
		q.Set("state", "running")
	}
	var out JobList
	err := c.get(ctx, "/api/v1/jobs", q, &out)
	return out.Jobs, err
}

// Job returns one job with its closed windows.
func (c *Client) Job(ctx context.Context, id string) (JobDetail, error) {
	var out JobDetail
	err := c.get(ctx, "/api/v1/jobs/"+url.PathEscape(id), nil, &out)
	return out, err
}

// Explain returns how every pattern's latest verdict for a job came about.
func (c *Client) Explain(ctx context.Context, id string) (JobExplanation, error) {
	var out JobExplanation
	err := c.get(ctx, "/api/v1/jobs/"+url.PathEscape(id)+"/explain", nil, &out)
	return out, err
}

// Flags lists the flags f selects, most recently raised first.
func (c *Client) Flags(ctx context.Context, f FlagFilter) ([]model.Flag, error) {
	q := url.Values{}
	set := func(k, v string) {
		if v != "" {
			q.Set(k, v)
		}
	}
	set("job", f.Job)
	set("pattern", f.Pattern)
	if f.State != nil {
		q.Set("state", f.State.String())
	}
	if f.Severity != nil {
		q.Set("severity", f.Severity.String())
	}
	var out FlagList
	err := c.get(ctx, "/api/v1/flags", q, &out)
	return out.Flags, err
}

// Acknowledge records that someone has a flag in hand.
func (c *Client) Acknowledge(ctx context.Context, id string, req AckRequest) (model.Ack, error) {
	var out model.Ack
	err := c.send(ctx, http.MethodPost, "/api/v1/flags/"+url.PathEscape(id)+"/ack", req, &out)
	return out, err
}

// Silence adds a silence.
func (c *Client) Silence(ctx context.Context, req SilenceRequest) (model.Silence, error) {
	var out model.Silence
	err := c.send(ctx, http.MethodPost, "/api/v1/silences", req, &out)
	return out, err
}

// Unsilence ends a silence.
func (c *Client) Unsilence(ctx context.Context, id string) error {
	var out map[string]string
	return c.send(ctx, http.MethodDelete, "/api/v1/silences/"+url.PathEscape(id), nil, &out)
}

// Silences lists the silences in force.
func (c *Client) Silences(ctx context.Context) ([]model.Silence, error) {
	var out SilenceList
	err := c.get(ctx, "/api/v1/silences", nil, &out)
	return out.Silences, err
}

// Agents lists every node's latest heartbeat.
func (c *Client) Agents(ctx context.Context) ([]model.AgentStatus, error) {
	var out AgentList
	err := c.get(ctx, "/api/v1/agents", nil, &out)
	return out.Agents, err
}

// Patterns lists the patterns in force.
func (c *Client) Patterns(ctx context.Context) ([]PatternFile, error) {
	var out PatternList
	err := c.get(ctx, "/api/v1/patterns", nil, &out)
	return out.Patterns, err
}

// Pattern returns one pattern in force.
func (c *Client) Pattern(ctx context.Context, name string) (PatternFile, error) {
	var out PatternFile
	err := c.get(ctx, "/api/v1/patterns/"+url.PathEscape(name), nil, &out)
	return out, err
}

// Baseline returns the coding in force and the windows behind it.
func (c *Client) Baseline(ctx context.Context) (BaselineReport, error) {
	var out BaselineReport
	err := c.get(ctx, "/api/v1/baseline", nil, &out)
	return out, err
}

// ExportBaseline writes the stored days as window-value CSV to w; origin
// "live" or "import" restricts it to one origin.
func (c *Client) ExportBaseline(ctx context.Context, origin baseline.Origin, w io.Writer) error {
	q := url.Values{}
	if origin != "" {
		q.Set("origin", string(origin))
	}
	resp, err := c.do(ctx, http.MethodGet, "/api/v1/baseline/export?"+q.Encode(), nil, "", -1)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	if _, err := io.Copy(w, resp.Body); err != nil {
		return fmt.Errorf("read the export from %s: %w", c.base, err)
	}
	return nil
}

// ImportBaseline sends a window-value CSV of size bytes (-1: unknown).
func (c *Client) ImportBaseline(ctx context.Context, body io.Reader, size int64) (ImportResult, error) {
	var out ImportResult
	resp, err := c.do(ctx, http.MethodPost, "/api/v1/baseline/import", body, "text/csv", size)
	if err != nil {
		return out, err
	}
	defer resp.Body.Close()
	return out, c.decode(resp, &out)
}

func (c *Client) get(ctx context.Context, path string, q url.Values, v any) error {
	if len(q) > 0 {
		path += "?" + q.Encode()
	}
	return c.send(ctx, http.MethodGet, path, nil, v)
}

// send does one JSON request (body nil for none) and decodes the answer.
func (c *Client) send(ctx context.Context, method, path string, body, v any) error {
	var rd io.Reader
	ctype := ""
	if body != nil {
		b, err := json.Marshal(body)
		if err != nil {
			return err
		}
		rd, ctype = bytes.NewReader(b), "application/json"
	}
	ctx, cancel := context.WithTimeout(ctx, 30*time.Second)
	defer cancel()
	resp, err := c.do(ctx, method, path, rd, ctype, -1)
	if err != nil {
		return err
	}
	defer resp.Body.Close()
	return c.decode(resp, v)
}

// do sends one request and returns the response when it is 200 OK; any
// other answer becomes an error carrying the server's text.
func (c *Client) do(ctx context.Context, method, path string, body io.Reader, ctype string, size int64) (*http.Response, error) {
	req, err := http.NewRequestWithContext(ctx, method, c.base+path, body)
	if err != nil {
		return nil, fmt.Errorf("aggregator URL %q: %w", c.base, err)
	}
	if size >= 0 {
		req.ContentLength = size
	}
	if ctype != "" {
		req.Header.Set("Content-Type", ctype)
	}
	resp, err := c.http.Do(req)
	if err != nil {
		return nil, fmt.Errorf("no aggregator answering at %s (is it running? set --url or SLUICE_AGGREGATOR_URL): %w", c.base, err)
	}
	if resp.StatusCode != http.StatusOK {
		defer resp.Body.Close()
		text, _ := io.ReadAll(io.LimitReader(resp.Body, 4096))
		return nil, &StatusError{Status: resp.StatusCode, Text: strings.TrimSpace(string(text))}
	}
	return resp, nil
}

func (c *Client) decode(resp *http.Response, v any) error {
	if err := json.NewDecoder(resp.Body).Decode(v); err != nil {
		return fmt.Errorf("read the answer of %s: %w", c.base, err)
	}
	return nil
}

// StatusError is an answer other than 200 OK.
type StatusError struct {
	Status int
	Text   string
}

func (e *StatusError) Error() string {
	if e.Text == "" {
		return http.StatusText(e.Status)
	}
	return e.Text
}
