# stickslip build and checks. `make test` is what CI runs.
GO ?= go
STATICCHECK_VERSION := v0.6.1
GOBIN := $(shell $(GO) env GOPATH)/bin

# Debian packages the OpenGL viewer needs to build (cgo headers) and to run
# headless (Xvfb with Mesa's software renderer).
DEB_PACKAGES := libgl1-mesa-dev libx11-dev libxcursor-dev libxrandr-dev \
	libxinerama-dev libxi-dev libxxf86vm-dev xvfb xauth libgl1-mesa-dri

.PHONY: deps build test vet staticcheck demo bench fmt

deps:
	@missing=""; for p in $(DEB_PACKAGES); do \
		dpkg-query -W -f='$${Status}' $$p 2>/dev/null | grep -q "install ok installed" || missing="$$missing $$p"; \
	done; \
	if [ -n "$$missing" ]; then \
		echo "installing:$$missing"; \
		SUDO=""; [ "$$(id -u)" = 0 ] || SUDO=sudo; \
		$$SUDO apt-get update -qq && DEBIAN_FRONTEND=noninteractive $$SUDO apt-get install -y -qq $$missing >/dev/null; \
	fi
	@test -x $(GOBIN)/staticcheck || $(GO) install honnef.co/go/tools/cmd/staticcheck@$(STATICCHECK_VERSION)

build: deps
	$(GO) build -o stickslip ./cmd/stickslip

vet:
	$(GO) vet ./...

staticcheck: deps
	$(GOBIN)/staticcheck ./...

test: deps vet staticcheck
	xvfb-run -a -s "-screen 0 1280x1024x24" $(GO) test -timeout 40m ./...

# The report's contact-event pictures render off screen, so the demo runs
# under Xvfb (installed by deps) whether or not a display is present.
demo: deps build
	xvfb-run -a ./stickslip demo

bench:
	xvfb-run -a $(GO) test -run '^$$' -bench . -benchmem ./...

fmt:
	gofmt -l -w .
