package main

import (
	"context"
	"errors"
	"fmt"
	"log/slog"
	"os"
	"strings"
	"time"

	rediscache "github.com/materials-lab/modegrid/server/cache/redis"
)

// redisPasswordEnv holds the Redis password itself. It is read from the
// environment only, never a flag, so it does not show in the process's
// arguments; --redis-password-file (MODEGRID_REDIS_PASSWORD_FILE) is the
// way to hand it over from a mounted secret.
const redisPasswordEnv = "MODEGRID_REDIS_PASSWORD"

// redisPassword returns the Redis password from file (when set) or the
// environment; giving both is an error. Errors never contain the password.
func redisPassword(file string, getenv func(string) string) (string, error) {
	env := getenv(redisPasswordEnv)
	if file == "" {
		return env, nil
	}
	if env != "" {
		return "", fmt.Errorf("redis-password-file and %s are both set: give one", redisPasswordEnv)
	}
	b, err := os.ReadFile(file)
	if err != nil {
		return "", fmt.Errorf("redis-password-file: %w", err)
	}
	pw := strings.TrimRight(string(b), "\r\n")
	if pw == "" {
		return "", fmt.Errorf("redis-password-file: %s is empty", file)
	}
	if strings.ContainsAny(pw, "\r\n") {
		return "", fmt.Errorf("redis-password-file: %s holds more than one line", file)
	}
	return pw, nil
}

// errRedisAuth marks Redis refusing modegridd's credentials at start-up.
var errRedisAuth = errors.New("redis refused the credentials")

// connectRedis builds the Redis backend and checks it once. Redis not
// answering is no reason to stay down (requests are computed until it
// answers); Redis refusing the password is a configuration error that
// would fail every cache operation, so it stops the start.
func connectRedis(ctx context.Context, opt rediscache.Options, log *slog.Logger) (*rediscache.Backend, error) {
	rediscache.SetLogger(log)
	r := rediscache.New(opt)
	pctx, cancel := context.WithTimeout(ctx, time.Second)
	defer cancel()
	switch err := r.Ping(pctx); {
	case rediscache.IsAuthError(err):
		r.Close()
		return nil, fmt.Errorf("%w: redis at %s: %v (password set: %v; check --redis-password-file or %s)",
			errRedisAuth, opt.Addr, err, opt.Password != "", redisPasswordEnv)
	case err != nil:
		log.Warn("redis not answering; serving without it until it does", "addr", opt.Addr, "err", err)
	default:
		log.Info("redis cache connected", "addr", opt.Addr, "password_set", opt.Password != "")
	}
	return r, nil
}
