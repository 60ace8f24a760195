package store

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"time"

	"gorm.io/gorm"
	"gorm.io/gorm/logger"
)

// gormLog sends GORM's messages to slog: slow statements as warnings and
// failed ones at debug level (the store turns them into its own errors,
// which their callers report). It formats a statement only when it will
// log it: GORM's stock slog logger renders every statement's SQL with its
// arguments before deciding, which cost a tenth of the assessment's CPU.
type gormLog struct {
	log  *slog.Logger
	slow time.Duration
}

func newGormLogger(l *slog.Logger) logger.Interface { return gormLog{log: l, slow: time.Second} }

// LogMode implements logger.Interface; the slog handler's level decides.
func (g gormLog) LogMode(logger.LogLevel) logger.Interface { return g }

// Info implements logger.Interface.
func (g gormLog) Info(ctx context.Context, msg string, args ...any) {
	g.log.InfoContext(ctx, fmt.Sprintf(msg, args...))
}

// Warn implements logger.Interface.
func (g gormLog) Warn(ctx context.Context, msg string, args ...any) {
	g.log.WarnContext(ctx, fmt.Sprintf(msg, args...))
}

// Error implements logger.Interface.
func (g gormLog) Error(ctx context.Context, msg string, args ...any) {
	g.log.ErrorContext(ctx, fmt.Sprintf(msg, args...))
}

// Trace implements logger.Interface.
func (g gormLog) Trace(ctx context.Context, begin time.Time, fc func() (string, int64), err error) {
	elapsed := time.Since(begin)
	switch {
	case err != nil && !errors.Is(err, gorm.ErrRecordNotFound):
		if !g.log.Enabled(ctx, slog.LevelDebug) {
			return
		}
		sql, _ := fc()
		g.log.DebugContext(ctx, "statement failed", slog.String("sql", sql), slog.Any("err", err))
	case elapsed > g.slow:
		sql, rows := fc()
		g.log.WarnContext(ctx, "slow statement", slog.Duration("took", elapsed), slog.Int64("rows", rows), slog.String("sql", sql))
	}
}
