package vocab

import (
	"errors"
	"reflect"
	"testing"

	"github.com/stretchr/testify/assert"
	"github.com/stretchr/testify/require"
)

type colour uint8

var errColour = errors.New("paint: invalid colour")

var colours = New("paint", "colour", "which colour the wall is", errColour,
	W(colour(0), "white", "no pigment"),
	W(colour(1), "sky-blue", "a light blue"),
).Aliases(map[string]colour{"Blue": 1})

func TestSet(t *testing.T) {
	assert.Equal(t, "paint.colour", colours.Name())
	assert.Equal(t, "sky-blue", colours.String(1))
	assert.Equal(t, "colour(7)", colours.String(7))
	assert.Equal(t, "a light blue", colours.Meaning(1))
	assert.Empty(t, colours.Meaning(7))
	assert.Equal(t, []colour{0, 1}, colours.Values())
	assert.Equal(t, []string{"white", "sky-blue"}, colours.Texts())

	b, err := colours.Marshal(1)
	require.NoError(t, err)
	assert.Equal(t, "sky-blue", string(b))
	_, err = colours.Marshal(7)
	assert.EqualError(t, err, "paint: invalid colour: colour = 7; want one of white, sky-blue")
	assert.ErrorIs(t, err, errColour)

	var c colour
	for text, want := range map[string]colour{"sky-blue": 1, " WHITE ": 0, "blue": 1} {
		c = 5
		require.NoError(t, colours.Unmarshal(&c, []byte(text)), text)
		assert.Equal(t, want, c, text)
	}
	c = 1
	err = colours.Unmarshal(&c, []byte("sky_blue"))
	assert.EqualError(t, err, `paint: invalid colour: colour = "sky_blue"; want one of white, sky-blue`)
	assert.Equal(t, colour(1), c, "a failed Unmarshal leaves the value alone")
	var e *Error
	require.ErrorAs(t, err, &e)
	assert.Equal(t, Error{Set: "paint.colour", Where: "colour", Value: `"sky_blue"`, Words: []string{"white", "sky-blue"}, errs: []error{errColour}}, *e)

	err = colours.Unmarshal(nil, []byte("white"))
	assert.EqualError(t, err, "paint: invalid colour: colour.UnmarshalText: receiver = nil; want a *colour to set")
	assert.ErrorIs(t, err, errColour)

	assert.NoError(t, colours.CheckAt("Paint: Options.Colour", 0))
	assert.EqualError(t, colours.CheckAt("Paint: Options.Colour", 2), "paint: invalid colour: Paint: Options.Colour = 2; want one of white, sky-blue")
}

func TestAt(t *testing.T) {
	errRoom := errors.New("house: invalid room")
	err := At(colours.Check(9), errRoom, "Build: Room.Colour")
	assert.EqualError(t, err, "house: invalid room: Build: Room.Colour = 9; want one of white, sky-blue")
	assert.ErrorIs(t, err, errRoom)
	assert.ErrorIs(t, err, errColour)
	other := errors.New("not a vocabulary error")
	assert.Equal(t, other, At(other, errRoom, "x"))
	assert.NoError(t, At(nil, errRoom, "x"))
}

func TestNewRefusesBadVocabularies(t *testing.T) {
	type kind int
	for name, words := range map[string][]Word[kind]{
		"none":        nil,
		"upper case":  {W(kind(0), "Heads", "m")},
		"underscore":  {W(kind(0), "in_root", "m")},
		"same word":   {W(kind(0), "a", "m"), W(kind(1), "a", "n")},
		"same value":  {W(kind(0), "a", "m"), W(kind(0), "b", "n")},
		"no meaning":  {W(kind(0), "a", "")},
		"final stop.": {W(kind(0), "a", "a sentence.")},
	} {
		assert.Panics(t, func() { New("p", "kind", "q", nil, words...) }, name)
	}
	assert.Panics(t, func() {
		New("paint", "colour", "again", nil, W(colour(0), "white", "m"))
	}, "a type declared twice")
	assert.Panics(t, func() { colours.Aliases(map[string]colour{"red": 9}) }, "an alias of a value with no word")
}

func TestRegistry(t *testing.T) {
	e, ok := Lookup(typeOf[colour]())
	require.True(t, ok)
	assert.Equal(t, "paint.colour", e.Name)
	assert.Equal(t, []Text{{"white", "no pigment"}, {"sky-blue", "a light blue"}}, e.Words)
	assert.Equal(t, []string{"blue"}, e.Aliases)
	found := false
	for _, x := range All() {
		found = found || x.Name == "paint.colour"
	}
	assert.True(t, found)
	_, ok = Lookup(typeOf[string]())
	assert.False(t, ok)
}

func typeOf[T any]() reflect.Type { return reflect.TypeFor[T]() }
